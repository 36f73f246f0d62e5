// @ts-check
"use strict";
// Configuration logic of the VS Code client, kept free of any `vscode` import so that
// `node --test` can exercise it: choosing the server command line, and turning the
// extension's settings into the server's `condhint` settings object.

/** Defaults of the server contract (settings section `condhint`). */
const DEFAULTS = Object.freeze({
  thresholds: Object.freeze({ info: 2, warning: 4, error: 8 }),
  inlayHints: false,
  defaultRange: Object.freeze([1e-6, 1e6]),
  samples: 256,
  debounceMs: 50,
  minSeverity: "info",
});

const SEVERITIES = Object.freeze(["info", "warning", "error"]);
/** Bounds the server accepts for whole-number settings. */
const LIMITS = Object.freeze({ samples: [8, 100000], debounceMs: [0, 100000] });
const SERVE_ARGS = Object.freeze(["-m", "condhint", "serve"]);

/**
 * @typedef {{thresholds: {info: number, warning: number, error: number}, inlayHints: boolean,
 *   defaultRange: number[], samples: number, debounceMs: number, minSeverity: string}} ServerSettings
 * @typedef {{command: string, args: string[], source: "setting" | "python-extension" | "fallback"}} ServerCommand
 * @typedef {(key: string) => unknown} SettingReader  reads `condhint.<key>`; undefined when unset
 */

/**
 * The command line that starts the server.
 * Order: the `condhint.server.command` setting, then `<interpreter> -m condhint serve` with the
 * interpreter of the Python extension, then `python -m condhint serve`.
 * @param {unknown} configured value of `condhint.server.command`
 * @param {string[] | undefined | null} pythonCommand interpreter command reported by the Python
 *   extension (its execCommand: an executable possibly followed by arguments), if any
 * @returns {{command: ServerCommand, problems: string[]}}
 */
function buildServerCommand(configured, pythonCommand) {
  /** @type {string[]} */
  const problems = [];
  if (Array.isArray(configured) && configured.length > 0) {
    const parts = configured.filter((p) => typeof p === "string" && p.trim() !== "");
    if (parts.length === configured.length) {
      return { command: { command: parts[0], args: parts.slice(1), source: "setting" }, problems };
    }
    problems.push("condhint.server.command must be a list of non-empty strings; ignoring it.");
  } else if (configured !== undefined && configured !== null && !Array.isArray(configured)) {
    problems.push("condhint.server.command must be a list of strings such as [\"condhint\", \"serve\"]; ignoring it.");
  }
  if (Array.isArray(pythonCommand) && pythonCommand.length > 0 &&
      pythonCommand.every((p) => typeof p === "string" && p !== "")) {
    return {
      command: {
        command: pythonCommand[0],
        args: [...pythonCommand.slice(1), ...SERVE_ARGS],
        source: "python-extension",
      },
      problems,
    };
  }
  return { command: { command: "python", args: [...SERVE_ARGS], source: "fallback" }, problems };
}

/** @param {unknown} v */
const isFiniteNumber = (v) => typeof v === "number" && Number.isFinite(v);

/** @param {readonly number[]} bounds */
const wholeIn = ([low, high]) => (/** @type {unknown} */ v) =>
  Number.isInteger(v) && /** @type {number} */ (v) >= low && /** @type {number} */ (v) <= high;

/**
 * Reads the extension's settings (`condhint.thresholds.info`, `condhint.inlayHints`, ...) and
 * builds the server's settings object. Each invalid value is reported once and replaced by its
 * default, so a typo never stops the server from starting.
 * @param {SettingReader} read
 * @returns {{settings: ServerSettings, problems: string[]}}
 */
function buildServerSettings(read) {
  /** @type {string[]} */
  const problems = [];
  /**
   * @template T
   * @param {string} key
   * @param {T} fallback
   * @param {(v: unknown) => boolean} ok
   * @param {string} expectation
   * @returns {T}
   */
  const pick = (key, fallback, ok, expectation) => {
    const value = read(key);
    if (value === undefined || value === null) return fallback;
    if (ok(value)) return /** @type {T} */ (value);
    problems.push(`condhint.${key} must be ${expectation}; using ${JSON.stringify(fallback)}.`);
    return fallback;
  };

  const nonNegative = (/** @type {unknown} */ v) => isFiniteNumber(v) && /** @type {number} */ (v) >= 0;
  let thresholds = {
    info: pick("thresholds.info", DEFAULTS.thresholds.info, nonNegative, "a number of digits >= 0"),
    warning: pick("thresholds.warning", DEFAULTS.thresholds.warning, nonNegative, "a number of digits >= 0"),
    error: pick("thresholds.error", DEFAULTS.thresholds.error, nonNegative, "a number of digits >= 0"),
  };
  if (!(thresholds.info <= thresholds.warning && thresholds.warning <= thresholds.error)) {
    problems.push(
      `condhint.thresholds must satisfy info <= warning <= error (got ${thresholds.info}, ` +
        `${thresholds.warning}, ${thresholds.error}); using ${DEFAULTS.thresholds.info}, ` +
        `${DEFAULTS.thresholds.warning}, ${DEFAULTS.thresholds.error}.`,
    );
    thresholds = { ...DEFAULTS.thresholds };
  }

  const range = pick(
    "defaultRange",
    [...DEFAULTS.defaultRange],
    (v) => Array.isArray(v) && v.length === 2 && v.every(isFiniteNumber) && v[0] < v[1],
    "a pair [low, high] of finite numbers with low < high",
  );

  const settings = {
    thresholds,
    inlayHints: pick("inlayHints", DEFAULTS.inlayHints, (v) => typeof v === "boolean", "true or false"),
    defaultRange: [...range],
    samples: pick("samples", DEFAULTS.samples, wholeIn(LIMITS.samples), `an integer from ${LIMITS.samples.join(" to ")}`),
    debounceMs: pick("debounceMs", DEFAULTS.debounceMs, wholeIn(LIMITS.debounceMs),
      `an integer from ${LIMITS.debounceMs.join(" to ")}`),
    minSeverity: pick("minSeverity", DEFAULTS.minSeverity, (v) => SEVERITIES.includes(/** @type {string} */ (v)),
      `one of ${SEVERITIES.join(", ")}`),
  };
  return { settings, problems };
}

/**
 * Answer to a `workspace/configuration` item: the settings object for section `condhint`
 * (or one key of it for `condhint.<key>`), null for sections that are not ours.
 * @param {string | undefined} section
 * @param {ServerSettings} settings
 * @returns {unknown}
 */
function configurationFor(section, settings) {
  if (section === undefined || section === null || section === "") return { condhint: settings };
  if (section === "condhint") return settings;
  if (section.startsWith("condhint.")) {
    /** @type {any} */
    let node = settings;
    for (const part of section.slice("condhint.".length).split(".")) {
      if (node === null || typeof node !== "object" || !(part in node)) return null;
      node = node[part];
    }
    return node;
  }
  return null;
}

/**
 * Whether a change to `condhint.<key>` needs the server to be restarted (rather than just sent
 * the new settings).
 * @param {(section: string) => boolean} affects `ConfigurationChangeEvent.affectsConfiguration`
 */
function needsRestart(affects) {
  return affects("condhint.server.command");
}

module.exports = { DEFAULTS, SEVERITIES, LIMITS, buildServerCommand, buildServerSettings, configurationFor, needsRestart };
