// Runs a Python script under the real MicroPython interpreter (the WebAssembly build from npm,
// pinned in package-lock.json) with the firmware package copied into its in-memory filesystem.
//
// usage: node run.mjs [--fw DIR]... [--heap BYTES] SCRIPT.py [ARG...]
//   --fw DIR     copy the folder DIR (e.g. firmware/runtrue_fw) to /lib/<basename> (repeatable)
//   --heap N     MicroPython heap size in bytes (default 4 MiB)
// The script's stdin (everything Node reads from its stdin) is the file /stdin in the FS;
// sys.argv is [SCRIPT, ARG...].  stdout is written byte for byte; an uncaught exception prints
// its traceback on stderr and exits 1; sys.exit(n) exits n.  The bundled command line of the
// package exits 0 even when the script raises, hence this runner.
import { loadMicroPython } from "@micropython/micropython-webassembly-pyscript";
import fs from "node:fs";
import path from "node:path";

function usage(msg) {
  process.stderr.write(`run.mjs: ${msg}\nusage: node run.mjs [--fw DIR]... [--heap BYTES] SCRIPT.py [ARG...]\n`);
  process.exit(2);
}

const fwDirs = [];
let heap = 4 * 1024 * 1024;
let script = null;
const args = process.argv.slice(2);
while (args.length) {
  const a = args.shift();
  if (a === "--fw") fwDirs.push(args.shift() ?? usage("--fw needs a folder"));
  else if (a === "--heap") heap = parseInt(args.shift() ?? usage("--heap needs a number"), 10);
  else { script = a; break; }
}
if (!script) usage("no script given");
const scriptArgs = args;

const out = [];
const err = [];
const mp = await loadMicroPython({
  heapsize: heap,
  linebuffer: false,
  stdout: (d) => out.push(Buffer.from(d)),
  stderr: (d) => err.push(Buffer.from(d)),
});

function copyTree(src, dst) {
  mp.FS.mkdirTree(dst);
  for (const ent of fs.readdirSync(src, { withFileTypes: true })) {
    if (ent.name === "__pycache__") continue;
    const s = path.join(src, ent.name);
    const d = `${dst}/${ent.name}`;
    if (ent.isDirectory()) copyTree(s, d);
    else if (ent.isFile()) mp.FS.writeFile(d, fs.readFileSync(s));
  }
}
for (const dir of fwDirs) copyTree(dir, `/lib/${path.basename(path.resolve(dir))}`);

let stdinData = Buffer.alloc(0);
if (!process.stdin.isTTY) {
  try { stdinData = fs.readFileSync(0); } catch { stdinData = Buffer.alloc(0); }
}
mp.FS.writeFile("/stdin", stdinData);
mp.FS.writeFile("/__script__.py", fs.readFileSync(script));
mp.globals.set("_rt_argv", JSON.stringify([script, ...scriptArgs]));

const harness = `
import sys, json
if '/lib' not in sys.path:
    sys.path.append('/lib')
sys.argv[:] = json.loads(_rt_argv)
_rt_code = 0
try:
    with open('/__script__.py') as _f:
        _src = _f.read()
    exec(compile(_src, sys.argv[0], 'exec'), {'__name__': '__main__'})
except SystemExit as _e:
    _a = _e.args[0] if _e.args else 0
    if _a is None:
        _rt_code = 0
    elif isinstance(_a, int):
        _rt_code = _a
    else:
        print(_a, file=sys.stderr)
        _rt_code = 1
except BaseException as _e:
    sys.print_exception(_e, sys.stderr)
    _rt_code = 1
`;
let code;
try {
  mp.runPython(harness);
  code = Number(mp.globals.get("_rt_code"));
} catch (e) {
  err.push(Buffer.from(`run.mjs: interpreter error: ${e}\n`));
  code = 1;
}
process.stdout.write(Buffer.concat(out));
process.stderr.write(Buffer.concat(err));
process.exitCode = code;
