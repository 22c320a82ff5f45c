// Runs the machine code of viper functions (armv6m, as mpy-cross writes it for the RP2040) on
// the Cortex-M0+ core of rp2040js, an RP2040 emulator, and counts the core's cycles.
//
// Reads one job as JSON on stdin: {"code_hex": "...", "calls": [{"args": [{"buf": byte offset}
// or {"int": value}], "buffers": [[byte offset, hex]], "reads": [[byte offset, length]]}]}.
// Buffers live in SRAM from DATA on; code runs from SRAM, as MicroPython's rp2 port runs the
// native code of an .mpy it loads.  Writes [{"r0", "cycles", "instructions", "runtime_calls",
// "reads"}] as JSON on stdout.
//
// The function is entered as MicroPython's runtime enters it (r0 the function object, r1 the
// number of positional arguments, r2 of keywords, r3 the argument array).  Its code finds the
// runtime's function table through the object (object -> module context -> constant table ->
// entry 0); every entry of that table here leads to a trap that returns at once with r0 unchanged.
// The viper entry code calls the table to check and convert the arguments (and the result), so
// plain numbers and buffer addresses pass straight through; each such call is listed in
// "runtime_calls" by its table index, and costs no cycles here.
import { RP2040 } from 'rp2040js';
import { readFileSync } from 'node:fs';

const RAM = 0x20000000;
const CODE = RAM;
const FUN_OBJ = RAM + 0x10000;
const CONTEXT = FUN_OBJ + 0x10;
const OBJ_TABLE = FUN_OBJ + 0x40;
const ARGS = FUN_OBJ + 0x80;
const FUN_TABLE = FUN_OBJ + 0x200;
const N_ENTRIES = 128;
const TRAP = RAM + 0x12000;
const EXIT = RAM + 0x12800;
const DATA = RAM + 0x14000;
const STACK_TOP = RAM + 0x41000;
const MAX_INSTRUCTIONS = 5e8;

const job = JSON.parse(readFileSync(0, 'utf8'));
const mcu = new RP2040();
const core = mcu.core;
const put32 = (addr, v) => mcu.sramView.setUint32(addr - RAM, v >>> 0, true);
const code = Buffer.from(job.code_hex, 'hex');
if (code.length > FUN_OBJ - CODE) throw new Error('code too large');
mcu.sram.set(code, CODE - RAM);
put32(FUN_OBJ + 4, CONTEXT);
put32(CONTEXT + 8, RAM + 0x11000);
put32(CONTEXT + 12, OBJ_TABLE);
put32(OBJ_TABLE, FUN_TABLE);
for (let k = 0; k < N_ENTRIES; k++) put32(FUN_TABLE + 4 * k, (TRAP + 4 * k) | 1);

const results = [];
for (const call of job.calls) {
  for (const [off, hex] of call.buffers) {
    const bytes = Buffer.from(hex, 'hex');
    if (DATA + off + bytes.length > STACK_TOP - 0x1000) throw new Error('buffers overlap the stack');
    mcu.sram.set(bytes, DATA + off - RAM);
  }
  call.args.forEach((a, i) => put32(ARGS + 4 * i, a.buf !== undefined ? DATA + a.buf : a.int));
  core.registers.fill(0);
  core.registers[0] = FUN_OBJ;
  core.registers[1] = call.args.length;
  core.registers[3] = ARGS;
  core.SP = STACK_TOP;
  core.LR = EXIT | 1;
  core.PC = CODE;
  const runtimeCalls = [];
  const cycles0 = core.cycles;
  let instructions = 0;
  while ((core.PC & ~1) !== EXIT) {
    const pc = core.PC & ~1;
    if (pc >= TRAP && pc < TRAP + 4 * N_ENTRIES) {
      runtimeCalls.push((pc - TRAP) / 4);
      core.PC = core.LR & ~1;
      continue;
    }
    if (pc < CODE || pc >= CODE + code.length) throw new Error(`jumped outside the code to 0x${pc.toString(16)}`);
    core.executeInstruction();
    if (++instructions > MAX_INSTRUCTIONS) throw new Error('no return after 5e8 instructions');
  }
  const reads = call.reads.map(([off, n]) =>
    Buffer.from(mcu.sram.subarray(DATA + off - RAM, DATA + off - RAM + n)).toString('hex'));
  results.push({ r0: core.registers[0] >>> 0, cycles: core.cycles - cycles0, instructions,
                 runtime_calls: runtimeCalls, reads });
}
process.stdout.write(JSON.stringify(results));
