"use strict";
// Unit tests of the client's configuration logic (Node's built-in test runner).
// Expected values come from the server contract: section `condhint`, defaults
// thresholds {2, 4, 8}, inlayHints false, defaultRange [1e-6, 1e6], samples 256,
// debounceMs 50, minSeverity "info"; and from package.json's contributed settings.

const test = require("node:test");
const assert = require("node:assert/strict");
const fs = require("node:fs");
const path = require("node:path");
const { DEFAULTS, LIMITS, buildServerCommand, buildServerSettings, configurationFor, needsRestart } = require("../src/config");

const manifest = JSON.parse(fs.readFileSync(path.join(__dirname, "..", "package.json"), "utf8"));
const contributed = manifest.contributes.configuration.properties;

/** A reader over a flat object of `condhint.<key>` values, like WorkspaceConfiguration.get. */
const reader = (values) => (key) => values[key];

test("server command: the configured command wins", () => {
  const { command, problems } = buildServerCommand(["/opt/venv/bin/condhint", "serve", "--log", "debug"], ["/usr/bin/python3"]);
  assert.deepEqual(command, { command: "/opt/venv/bin/condhint", args: ["serve", "--log", "debug"], source: "setting" });
  assert.deepEqual(problems, []);
});

test("server command: Python extension interpreter, with its own arguments kept", () => {
  const { command } = buildServerCommand([], ["conda", "run", "-n", "sci", "python"]);
  assert.deepEqual(command, {
    command: "conda",
    args: ["run", "-n", "sci", "python", "-m", "condhint", "serve"],
    source: "python-extension",
  });
});

test("server command: falls back to python -m condhint serve", () => {
  for (const py of [undefined, null, [], [""]]) {
    const { command } = buildServerCommand(undefined, py);
    assert.deepEqual(command, { command: "python", args: ["-m", "condhint", "serve"], source: "fallback" });
  }
});

test("server command: malformed setting is reported and ignored", () => {
  const asString = buildServerCommand("condhint serve", undefined);
  assert.equal(asString.command.source, "fallback");
  assert.equal(asString.problems.length, 1);
  assert.match(asString.problems[0], /condhint\.server\.command/);

  const withBlank = buildServerCommand(["condhint", "  ", 3], ["/usr/bin/python3"]);
  assert.equal(withBlank.command.source, "python-extension");
  assert.equal(withBlank.problems.length, 1);
});

test("settings: nothing set gives the contract's defaults", () => {
  const { settings, problems } = buildServerSettings(reader({}));
  assert.deepEqual(problems, []);
  assert.deepEqual(settings, {
    thresholds: { info: 2, warning: 4, error: 8 },
    inlayHints: false,
    defaultRange: [1e-6, 1e6],
    samples: 256,
    debounceMs: 50,
    minSeverity: "info",
  });
});

test("settings: package.json defaults agree with the contract", () => {
  const { settings } = buildServerSettings((key) => contributed[`condhint.${key}`]?.default);
  assert.deepEqual(settings, buildServerSettings(reader({})).settings);
  assert.deepEqual(contributed["condhint.minSeverity"].enum, ["info", "warning", "error"]);
});

test("settings: every server key has a contributed VS Code setting", () => {
  const names = Object.keys(contributed);
  for (const key of Object.keys(DEFAULTS)) {
    if (key === "thresholds") {
      for (const level of ["info", "warning", "error"]) assert.ok(names.includes(`condhint.thresholds.${level}`), level);
    } else {
      assert.ok(names.includes(`condhint.${key}`), key);
    }
  }
  assert.ok(names.includes("condhint.server.command"));
});

test("settings: valid user values are passed through under the server's names", () => {
  const { settings, problems } = buildServerSettings(reader({
    "thresholds.info": 1.5, "thresholds.warning": 3, "thresholds.error": 10,
    inlayHints: true, defaultRange: [1e-3, 1e3], samples: 64, debounceMs: 0, minSeverity: "warning",
  }));
  assert.deepEqual(problems, []);
  assert.deepEqual(settings, {
    thresholds: { info: 1.5, warning: 3, error: 10 },
    inlayHints: true, defaultRange: [1e-3, 1e3], samples: 64, debounceMs: 0, minSeverity: "warning",
  });
});

test("settings: each invalid value is reported and replaced by its default", () => {
  const { settings, problems } = buildServerSettings(reader({
    "thresholds.info": -1, inlayHints: "yes", defaultRange: [5, 1], samples: 2.5, debounceMs: -3, minSeverity: "hint",
  }));
  assert.equal(problems.length, 6);
  for (const key of ["thresholds.info", "inlayHints", "defaultRange", "samples", "debounceMs", "minSeverity"]) {
    assert.ok(problems.some((p) => p.startsWith(`condhint.${key} `)), key);
  }
  assert.deepEqual(settings, buildServerSettings(reader({})).settings);
});

test("settings: whole-number bounds match package.json and the server", () => {
  assert.equal(contributed["condhint.samples"].minimum, LIMITS.samples[0]);
  assert.equal(contributed["condhint.samples"].maximum, LIMITS.samples[1]);
  assert.equal(contributed["condhint.debounceMs"].minimum, LIMITS.debounceMs[0]);
  assert.equal(contributed["condhint.debounceMs"].maximum, LIMITS.debounceMs[1]);
  for (const [key, [low, high]] of Object.entries(LIMITS)) {
    assert.equal(buildServerSettings(reader({ [key]: low })).settings[key], low);
    assert.equal(buildServerSettings(reader({ [key]: high })).settings[key], high);
    assert.equal(buildServerSettings(reader({ [key]: low - 1 })).problems.length, 1);
    assert.equal(buildServerSettings(reader({ [key]: high + 1 })).problems.length, 1);
  }
});

test("settings: non-finite range ends are rejected", () => {
  for (const range of [[0, Infinity], [NaN, 1], [1], [1, 2, 3], "1e-6..1e6"]) {
    const { settings, problems } = buildServerSettings(reader({ defaultRange: range }));
    assert.deepEqual(settings.defaultRange, [1e-6, 1e6], String(range));
    assert.equal(problems.length, 1);
  }
});

test("settings: thresholds out of order fall back together", () => {
  const { settings, problems } = buildServerSettings(reader({ "thresholds.warning": 9 }));
  assert.deepEqual(settings.thresholds, { info: 2, warning: 4, error: 8 });
  assert.equal(problems.length, 1);
  assert.match(problems[0], /info <= warning <= error/);
});

test("settings: returned objects are fresh copies, defaults stay frozen", () => {
  const a = buildServerSettings(reader({})).settings;
  a.defaultRange[0] = 42;
  a.thresholds.info = 42;
  assert.deepEqual(buildServerSettings(reader({})).settings.defaultRange, [1e-6, 1e6]);
  assert.equal(DEFAULTS.thresholds.info, 2);
});

test("workspace/configuration answers", () => {
  const { settings } = buildServerSettings(reader({ samples: 32 }));
  assert.deepEqual(configurationFor("condhint", settings), settings);
  assert.equal(configurationFor("condhint.samples", settings), 32);
  assert.equal(configurationFor("condhint.thresholds.error", settings), 8);
  assert.deepEqual(configurationFor(undefined, settings), { condhint: settings });
  assert.equal(configurationFor("condhint.nope", settings), null);
  assert.equal(configurationFor("condhint.samples.deeper", settings), null);
  assert.equal(configurationFor("python", settings), null);
  // The answer must survive JSON-RPC serialisation unchanged.
  assert.deepEqual(JSON.parse(JSON.stringify(configurationFor("condhint", settings))), settings);
});

test("only the server command needs a restart", () => {
  assert.equal(needsRestart((s) => s === "condhint.server.command"), true);
  assert.equal(needsRestart((s) => s === "condhint.samples"), false);
});

test("manifest: restart command and activation", () => {
  const commands = manifest.contributes.commands.map((c) => `${c.category}: ${c.title}`);
  assert.ok(commands.includes("condhint: Restart server"));
  // Python files, and notebooks (whose Python cells the server analyses as one module).
  assert.deepEqual(manifest.activationEvents, ["onLanguage:python", "onNotebook:jupyter-notebook"]);
  // vscode-languageclient 9.x requires VS Code >= 1.82 (its own engines field).
  const lc = JSON.parse(fs.readFileSync(require.resolve("vscode-languageclient/package.json"), "utf8"));
  const need = lc.engines.vscode.replace(/^[^\d]*/, "").split(".").map(Number);
  const ours = manifest.engines.vscode.replace(/^[^\d]*/, "").split(".").map(Number);
  assert.ok(ours[0] > need[0] || (ours[0] === need[0] && ours[1] >= need[1]), `${ours} < ${need}`);
});
