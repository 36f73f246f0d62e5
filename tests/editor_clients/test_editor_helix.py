"""The Helix snippet: valid TOML, the right command, language and settings section."""
import tomllib

from editor_support import CLIENTS, CONTRACT_DEFAULTS, check_settings_shape

HELIX = CLIENTS / "helix" / "languages.toml"


def load() -> dict:
    with HELIX.open("rb") as f:
        return tomllib.load(f)


def test_language_server_command() -> None:
    server = load()["language-server"]["condhint"]
    assert [server["command"], *server["args"]] == ["condhint", "serve"]


def test_config_is_the_condhint_section() -> None:
    # Helix sends `config` as initializationOptions and looks up workspace/configuration
    # sections in it, so our settings sit under the key "condhint".
    config = load()["language-server"]["condhint"]["config"]
    assert list(config) == ["condhint"]
    section = config["condhint"]
    check_settings_shape(section)
    assert set(section) == set(CONTRACT_DEFAULTS)
    # Every value but inlayHints (switched on in the snippet) is the contract's default.
    assert {k: v for k, v in section.items() if k != "inlayHints"} == {
        k: v for k, v in CONTRACT_DEFAULTS.items() if k != "inlayHints"}


def test_python_uses_condhint() -> None:
    languages = {lang["name"]: lang for lang in load()["language"]}
    assert "condhint" in languages["python"]["language-servers"]
