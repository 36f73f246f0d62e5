"""Security: the engine never evaluates document text, reads only the files it is asked about, and the
server's TCP mode listens on loopback unless told otherwise.

The checks run `condhint check` in a fresh interpreter with an audit hook (PEP 578) that records code
execution, process creation and file access after condhint's own imports are done.
"""
from __future__ import annotations

import json
import os
import select
import socket
import subprocess
import sys
import time
from pathlib import Path

import pytest

HOSTILE = '''\
import os, subprocess
open({s1!r}, "w").write("module level ran")
os.system("touch {s2}")
__import__("os").system("touch {s3}")
raise SystemExit("the file was executed")
import secret_sibling
data = open("other.txt").read()


def f(x=open({s4!r}, "w"), y=os.system("touch {s5}")):
    # condhint: __import__("os").system("touch {s6}") <= x <= 1, x in [exec("open({s7!r}, 'w')"), 2]
    return (x + eval("__import__('os').system('touch {s8}')")) - x * 1.5


@__import__("os").system("touch {s9}") or (lambda g: g)
def g(n):
    return f"{{__import__('os').system('touch {s10}')}}" and (n + 1.0) ** 0.5 - n ** 0.5


class K:
    os.system("touch {s11}")
    v = exec("open({s12!r}, 'w')")

if __name__ == "__main__":
    os.system("touch {s13}")
'''

PROBE = r'''
import json, os, sys
from pathlib import Path
target, outfile = sys.argv[1], sys.argv[2]
from condhint.cli import main
import condhint.diskcache, condhint.engine, condhint.runner  # noqa: F401  (condhint's own imports first)
warm = Path(target).with_name("warm_up.py")
warm.write_text("import math\n\ndef w(t):\n    return math.sqrt(t + 1) - math.sqrt(t)\n")
main(["check", str(warm), "--format", "json", "--output", os.devnull])
events = []
WATCH = ("exec", "compile", "os.system", "subprocess.Popen", "os.exec", "os.posix_spawn", "os.spawn", "os.fork",
         "open", "os.listdir", "os.scandir", "import")
def hook(event, args):
    if event.startswith(WATCH):
        if event == "open":
            events.append(["open", str(args[0]), str(args[1])])
        elif event == "exec":
            code = args[0]
            events.append(["exec", getattr(code, "co_filename", "?"), getattr(code, "co_name", "?")])
        elif event == "compile":
            events.append(["compile", str(args[1])])
        elif event == "import":
            events.append(["import", str(args[0])])
        else:
            events.append([event, repr(args)[:200]])
sys.addaudithook(hook)
rc = main(["check", target, "--format", "json", "--min-severity", "info", "--output", outfile + ".report"])
Path(outfile).write_text(json.dumps({"rc": rc, "events": events}))
'''


def _probe(tmp_path: Path, target: Path) -> tuple[dict, dict]:
    out = tmp_path / "probe.json"
    proc = subprocess.run([sys.executable, "-c", PROBE, str(target), str(out)], cwd=tmp_path, capture_output=True,
                          text=True, timeout=300)
    assert proc.returncode == 0, proc.stderr
    return json.loads(out.read_text()), json.loads(Path(str(out) + ".report").read_text())


def _hostile(tmp_path: Path) -> tuple[Path, list[Path]]:
    sentinels = [tmp_path / f"sentinel_{i}" for i in range(1, 14)]
    text = HOSTILE.format(**{f"s{i}": str(p) for i, p in enumerate(sentinels, 1)})
    target = tmp_path / "hostile.py"
    target.write_text(text)
    (tmp_path / "secret_sibling.py").write_text("open('imported', 'w')\n")
    (tmp_path / "other.txt").write_text("not to be read\n")
    return target, sentinels


def test_hostile_file_is_analysed_without_running_it(tmp_path: Path) -> None:
    target, sentinels = _hostile(tmp_path)
    probe, report = _probe(tmp_path, target)
    assert [p.name for p in sentinels if p.exists()] == []
    assert not (tmp_path / "imported").exists()
    assert probe["rc"] in (0, 1)
    assert report["files"][0]["status"] == "ok"
    assert any(f["code"] == "CH101" for f in report["findings"])  # it was really analysed
    events = probe["events"]
    assert [e for e in events if e[0] in ("exec", "os.system", "subprocess.Popen") or e[0].startswith(
        ("os.exec", "os.posix_spawn", "os.spawn", "os.fork"))] == []
    # Parsing is allowed (ast.parse compiles to a tree only), always of the file as text, never to code.
    assert all(e[1] in ("<unknown>", "<string>", str(target)) for e in events if e[0] == "compile")


def test_only_the_named_file_is_read(tmp_path: Path) -> None:
    target, _ = _hostile(tmp_path)
    probe, _ = _probe(tmp_path, target)
    here = str(tmp_path)
    touched = {Path(e[1]).name for e in probe["events"] if e[0] in ("open", "os.listdir", "os.scandir")
               and e[1].startswith(here)}
    # The file itself, and the configuration lookup (pyproject.toml) in its directory; nothing else there.
    assert touched <= {"hostile.py", "pyproject.toml", "probe.json.report"} | {
        n for n in touched if n.startswith(".probe.json.report.")}, touched
    assert "hostile.py" in touched
    assert not [e for e in probe["events"] if e[0] == "import" and "secret_sibling" in e[1]]


def test_engine_api_does_not_run_the_text(tmp_path: Path) -> None:
    from condhint.config import Config
    from condhint.engine import check_source

    target, sentinels = _hostile(tmp_path)
    cwd = os.getcwd()
    os.chdir(tmp_path)
    try:
        rep = check_source(target.read_text(), "hostile.py", Config())
    finally:
        os.chdir(cwd)
    assert rep.status == "ok"
    assert [p.name for p in sentinels if p.exists()] == []


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _listening(port: int) -> list[str]:
    """Local addresses of sockets listening on `port`, from /proc/net/tcp{,6} (hex as the kernel writes it)."""
    out = []
    for name in ("/proc/net/tcp", "/proc/net/tcp6"):
        try:
            rows = Path(name).read_text().splitlines()[1:]
        except OSError:
            continue
        for row in rows:
            cols = row.split()
            addr, hexport = cols[1].rsplit(":", 1)
            if int(hexport, 16) == port and cols[3] == "0A":  # 0A = LISTEN
                out.append(addr)
    return out


@pytest.mark.skipif(not Path("/proc/net/tcp").exists(), reason="needs Linux /proc/net/tcp")
def test_tcp_mode_listens_on_loopback_by_default() -> None:
    port = _free_port()
    proc = subprocess.Popen([sys.executable, "-m", "condhint", "serve", "--tcp", str(port)],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    try:
        deadline = time.monotonic() + 60
        while not _listening(port):
            assert proc.poll() is None, proc.stderr.read().decode() if proc.stderr else ""
            assert time.monotonic() < deadline, "the server did not listen within 60 s"
            time.sleep(0.05)
        addrs = _listening(port)
        assert addrs and all(a in ("0100007F", "00000000000000000000000001000000") for a in addrs), addrs
        with socket.create_connection(("127.0.0.1", port), timeout=10) as c:
            body = json.dumps({"jsonrpc": "2.0", "id": 1, "method": "initialize",
                               "params": {"processId": None, "rootUri": None, "capabilities": {}}}).encode()
            c.sendall(b"Content-Length: %d\r\n\r\n" % len(body) + body)
            c.settimeout(30)
            got = b""
            while b"capabilities" not in got:
                chunk = c.recv(65536)
                assert chunk, "connection closed before the initialize answer"
                got += chunk
    finally:
        proc.kill()
        proc.wait(10)
        for stream in (proc.stdout, proc.stderr):
            if stream:
                stream.close()
