// @ts-check
"use strict";
// VS Code side of the condhint client: starts the server, answers its configuration requests,
// forwards settings changes and offers "condhint: Restart server". All decisions about the
// command line and the settings live in ./config.js.

const vscode = require("vscode");
const { LanguageClient, TransportKind, DidChangeConfigurationNotification } = require("vscode-languageclient/node");
const { buildServerCommand, buildServerSettings, configurationFor, needsRestart } = require("./config");

const PYTHON_EXTENSION_ID = "ms-python.python";

/** @type {LanguageClient | undefined} */
let client;
/** @type {vscode.OutputChannel} */
let output;
/** Problems already shown to the user, so each is shown once per session. */
const shownProblems = new Set();

/** @param {string[]} problems */
function reportProblems(problems) {
  for (const problem of problems) {
    output.appendLine(`[settings] ${problem}`);
    if (!shownProblems.has(problem)) {
      shownProblems.add(problem);
      void vscode.window.showWarningMessage(problem);
    }
  }
}

function currentSettings() {
  const cfg = vscode.workspace.getConfiguration("condhint");
  const { settings, problems } = buildServerSettings((key) => cfg.get(key));
  reportProblems(problems);
  return settings;
}

/**
 * Interpreter selected in the Python extension, as a command (executable and arguments), or
 * undefined when the extension is absent or reports none. Both the current environments API
 * and the older `settings.getExecutionDetails` API are tried.
 * @returns {Promise<string[] | undefined>}
 */
async function pythonFromPythonExtension() {
  const extension = vscode.extensions.getExtension(PYTHON_EXTENSION_ID);
  if (!extension) return undefined;
  try {
    const api = extension.isActive ? extension.exports : await extension.activate();
    const resource = vscode.workspace.workspaceFolders?.[0]?.uri;
    const environments = api?.environments;
    if (environments?.getActiveEnvironmentPath && environments?.resolveEnvironment) {
      const resolved = await environments.resolveEnvironment(environments.getActiveEnvironmentPath(resource));
      const executable = resolved?.executable?.uri?.fsPath;
      if (executable) return [executable];
    }
    const details = api?.settings?.getExecutionDetails?.(resource);
    if (Array.isArray(details?.execCommand) && details.execCommand.length > 0) return details.execCommand;
  } catch (error) {
    output.appendLine(`[python] could not ask the Python extension for its interpreter: ${error}`);
  }
  return undefined;
}

/** @returns {Promise<LanguageClient>} */
async function createClient() {
  const cfg = vscode.workspace.getConfiguration("condhint");
  const { command, problems } = buildServerCommand(cfg.get("server.command"), await pythonFromPythonExtension());
  reportProblems(problems);
  output.appendLine(`[server] starting ${[command.command, ...command.args].join(" ")} (from ${command.source})`);

  // With the stdio transport, vscode-languageclient appends `--stdio` to the command line;
  // `condhint serve` accepts it (and `--pipe`, `--socket`, `--clientProcessId`).
  /** @type {import("vscode-languageclient/node").ServerOptions} */
  const serverOptions = {
    command: command.command,
    args: command.args,
    transport: TransportKind.stdio,
    options: { cwd: vscode.workspace.workspaceFolders?.[0]?.uri.fsPath },
  };
  /** @type {import("vscode-languageclient/node").LanguageClientOptions} */
  const clientOptions = {
    documentSelector: [
      { scheme: "file", language: "python" },
      { scheme: "untitled", language: "python" },
      // Python cells of notebooks (.ipynb): the server synchronises whole notebooks (notebookDocument/*),
      // and this entry lets hover and code actions reach the cells.
      { notebook: "*", language: "python" },
    ],
    outputChannel: output,
    initializationOptions: { condhint: currentSettings() },
    middleware: {
      workspace: {
        // Answer from our own settings mapping, not from the raw `condhint.*` tree.
        configuration: (params) => params.items.map((item) => configurationFor(item.section, currentSettings())),
      },
    },
  };
  return new LanguageClient("condhint", "condhint", serverOptions, clientOptions);
}

async function startClient() {
  client = await createClient();
  try {
    await client.start();
  } catch (error) {
    output.appendLine(`[server] failed to start: ${error}`);
    void vscode.window.showErrorMessage(
      "condhint: the server did not start. Install condhint in the selected Python interpreter " +
        "(pip install condhint) or set condhint.server.command.",
      "Show output",
    ).then((choice) => choice && output.show());
  }
}

async function stopClient() {
  const running = client;
  client = undefined;
  if (!running) return;
  try {
    await running.stop();
  } catch (error) {
    output.appendLine(`[server] error while stopping: ${error}`);
  }
}

async function restartServer() {
  output.appendLine("[server] restart requested");
  await stopClient();
  await startClient();
}

/** @param {vscode.ConfigurationChangeEvent} event */
async function onConfigurationChanged(event) {
  if (!event.affectsConfiguration("condhint")) return;
  if (needsRestart((section) => event.affectsConfiguration(section))) {
    await restartServer();
  } else if (client?.isRunning()) {
    await client.sendNotification(DidChangeConfigurationNotification.type, {
      settings: { condhint: currentSettings() },
    });
  }
}

/** @param {vscode.ExtensionContext} context */
async function activate(context) {
  output = vscode.window.createOutputChannel("condhint");
  context.subscriptions.push(
    output,
    vscode.commands.registerCommand("condhint.restartServer", restartServer),
    vscode.commands.registerCommand("condhint.showOutput", () => output.show()),
    vscode.workspace.onDidChangeConfiguration(onConfigurationChanged),
  );
  // Starting the client activates the Python extension, whose events we can then follow.
  await startClient();
  const python = vscode.extensions.getExtension(PYTHON_EXTENSION_ID);
  const onInterpreterChange = python?.isActive
    ? python.exports?.environments?.onDidChangeActiveEnvironmentPath
    : undefined;
  if (onInterpreterChange) {
    context.subscriptions.push(
      onInterpreterChange(() => {
        const configured = vscode.workspace.getConfiguration("condhint").get("server.command");
        if (!Array.isArray(configured) || configured.length === 0) void restartServer();
      }),
    );
  }
}

async function deactivate() {
  await stopClient();
}

module.exports = { activate, deactivate };
