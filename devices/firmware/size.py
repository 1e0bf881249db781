"""`make firmware-size`: what the firmware library costs on a Cortex-M0+, part by part.

Cross-compiles every `devices/firmware/pt_*.c` with the distribution's `arm-none-eabi-gcc -Os
-mcpu=cortex-m0plus -mthumb` (function and data sections) and links them into an image that keeps every
public function (`--undefined`, `--gc-sections`) and the compiler's helpers they call (libgcc: 64-bit
multiply, shift and division; libc's string functions), as a firmware image calling them all would. Each
part's figure is what its own object puts in that image (from the linker's map); the helpers are a row
of their own; the detector, emitter and command parser are also linked alone together (helpers
included) against the 3 KB goal. Flash is `.text + .rodata + .data`, static RAM `.data + .bss` (the
library has none: all state is in the caller's structs), stack the deepest call chain into the part
(gcc's frame sizes and call graph, `-fcallgraph-info=su`). RAM per channel and the fixed part come
from `sizeof` of the library's types on the target (every `pt_*_t` in the headers).

Parts are named by file (`pt_detect.c` the detector, `pt_groups.c` groups and sliders, `pt_emit.c` the
emitter, `pt_cmd.c` the command parser); a file not known here is listed by its own name.
"""

from __future__ import annotations

import re
import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

HERE = Path(__file__).resolve().parent
CC = "arm-none-eabi-gcc"
INSTALL = "apt-get install gcc-arm-none-eabi libnewlib-arm-none-eabi"
CFLAGS = ["-std=c99", "-Os", "-mcpu=cortex-m0plus", "-mthumb", "-ffunction-sections", "-fdata-sections",
          "-Wall", "-Wextra", "-Werror", "-pedantic"]
PART_NAMES = {"pt_detect.c": "detector", "pt_groups.c": "groups and sliders", "pt_emit.c": "emitter",
              "pt_cmd.c": "command parser"}
TOGETHER = ("pt_detect.c", "pt_emit.c", "pt_cmd.c")  # the goal: these three within 3 KB of flash
FLASH_GOAL_BYTES = 3 * 1024
RAM_PER_CHANNEL_GOAL_BYTES = 24
FLASH_SECTIONS = (".text", ".rodata", ".data")
RAM_SECTIONS = (".data", ".bss")


def run(args: list[str], cwd: Path) -> str:
    done = subprocess.run(args, cwd=cwd, capture_output=True, text=True, check=False)
    if done.returncode != 0:
        raise SystemExit(f"firmware-size: {' '.join(args[:2])} ... failed:\n{done.stderr.strip()}")
    return done.stdout


def tool(name: str) -> str:
    return CC[: -len("gcc")] + name


def public_functions(obj: Path, work: Path) -> list[str]:
    out = run([tool("nm"), "-g", "--defined-only", str(obj)], work)
    return [line.split()[2] for line in out.splitlines() if len(line.split()) == 3 and line.split()[1] == "T"]


def link(keep: list[Path], objs: list[Path], work: Path, name: str) -> dict[str, tuple[int, int]]:
    """Link `objs` keeping every public function of `keep` (the rest is dropped by --gc-sections) and the
    library helpers they call. Returns (flash, static RAM) bytes per input file (object name, or the
    archive's name for libgcc / libc), from the linker's map."""
    symbols = [s for o in keep for s in public_functions(o, work)]
    if not symbols:
        return {}
    elf, mapfile = work / f"{name}.elf", work / f"{name}.map"
    run([CC, "-mcpu=cortex-m0plus", "-mthumb", "-nostartfiles", "--specs=nano.specs", "-Wl,--gc-sections",
         f"-Wl,-Map={mapfile}", f"-Wl,--entry={symbols[0]}", *(f"-Wl,--undefined={s}" for s in symbols),
         *map(str, objs), "-lc", "-lgcc", "-o", str(elf)], work)
    return map_contributions(mapfile.read_text())


def map_contributions(text: str) -> dict[str, tuple[int, int]]:
    out: dict[str, list[int]] = {}
    body = text.split("Linker script and memory map", 1)[-1]
    section = ""
    entry = re.compile(r"^ (\.[^\s]+)?\s+0x[0-9a-f]+\s+0x([0-9a-f]+)\s+(\S+)$")
    for line in body.splitlines():
        if re.match(r"^ \.[^\s]+$", line):  # a long input section name: its numbers are on the next line
            section = line.strip()
            continue
        m = entry.match(line)
        if not m:
            section = ""
            continue
        name = m.group(1) or section
        section = ""
        where = m.group(3)
        owner = Path(where.split("(")[0]).name
        owner = "libgcc" if "libgcc" in owner else "libc" if "libc" in owner else owner
        size = int(m.group(2), 16)
        slot = out.setdefault(owner, [0, 0])
        if any(name == s or name.startswith(s + ".") for s in FLASH_SECTIONS):
            slot[0] += size
        if any(name == s or name.startswith(s + ".") for s in RAM_SECTIONS):
            slot[1] += size
    return {k: (v[0], v[1]) for k, v in out.items()}


def total(parts: dict[str, tuple[int, int]]) -> tuple[int, int]:
    return sum(f for f, _ in parts.values()), sum(r for _, r in parts.values())


_NODE = re.compile(r'node: \{ title: "([^"]+)" label: "([^"\\]+)\\n[^"]*?(?:\\n(\d+) bytes[^"]*)?"')
_EDGE = re.compile(r'edge: \{ sourcename: "([^"]+)" targetname: "([^"]+)"')
INDIRECT = "__indirect_call"


def call_graph(ci_files: list[Path]) -> tuple[dict[str, int], dict[str, set[str]], dict[str, Path]]:
    """Every function's own frame, its callees and its file, from gcc's -fcallgraph-info=su files (one
    per source; a call into another file names the function, which the other file defines)."""
    frames: dict[str, int] = {}
    calls: dict[str, set[str]] = {}
    home: dict[str, Path] = {}
    for ci in ci_files:
        text = ci.read_text()
        for title, _name, size in _NODE.findall(text):
            if size:
                frames[title] = int(size)
                home[title] = ci
        for source, target in _EDGE.findall(text):
            calls.setdefault(source, set()).add(target)
    return frames, calls, home


def deepest_stack(frames: dict[str, int], calls: dict[str, set[str]], start: str) -> tuple[int, bool]:
    """The stack a call of `start` needs at its deepest (its frame plus its deepest callee's, through
    every file), and whether a path calls through a function pointer (the caller's callbacks: put-char,
    hooks; their own stack comes on top)."""
    memo: dict[str, tuple[int, bool]] = {}

    def depth(fn: str, seen: frozenset[str]) -> tuple[int, bool]:
        if fn == INDIRECT:
            return 0, True
        if fn in memo:
            return memo[fn]
        if fn in seen:  # recursion: the library has none, and a bound could not be given
            raise ValueError(f"{fn} calls itself: no stack bound")
        best, indirect = 0, False
        for callee in calls.get(fn, ()):
            d, i = depth(callee, seen | {fn})
            best, indirect = max(best, d), indirect or i
        memo[fn] = (frames.get(fn, 0) + best, indirect)
        return memo[fn]

    return depth(start, frozenset())


def stack_bytes(part: Path, frames: dict[str, int], calls: dict[str, set[str]], home: dict[str, Path]) -> str:
    """The deepest stack a call into the part needs (gcc's own frame sizes along the deepest call chain,
    into the other parts it calls), `+cb` when a chain goes through the caller's callbacks."""
    depths = [deepest_stack(frames, calls, fn) for fn, ci in home.items() if ci == part]
    if not depths:
        return "0"
    deepest = max(d for d, _ in depths)
    return f"{deepest}{'+cb' if any(i for _, i in depths) else ''}"


def type_sizes(headers: list[Path], work: Path) -> dict[str, int]:
    """sizeof every `pt_*_t` typedef in the headers, on the target (read back from the symbol table)."""
    names: list[str] = []
    for h in headers:
        for name in re.findall(r"}\s*(pt_\w+_t)\s*;", h.read_text()):
            if name not in names:
                names.append(name)
    src = work / "sizes.c"
    src.write_text("".join(f'#include "{h.name}"\n' for h in headers)
                   + "".join(f"char size_of_{n}[sizeof({n})];\n" for n in names))
    obj = work / "sizes.o"
    run([CC, *CFLAGS, f"-I{HERE}", "-c", str(src), "-o", str(obj)], work)
    out = run([tool("nm"), "-S", str(obj)], work)
    sizes = {}
    for line in out.splitlines():
        parts = line.split()
        if len(parts) == 4 and parts[3].startswith("size_of_"):
            sizes[parts[3][len("size_of_"):]] = int(parts[1], 16)
    return {n: sizes[n] for n in names if n in sizes}


def main() -> int:
    if shutil.which(CC) is None:
        print(f"firmware-size: {CC} is not installed; install it with: {INSTALL}")
        return 2
    sources = sorted(HERE.glob("pt_*.c"))
    headers = sorted(HERE.glob("pt_*.h"))
    with tempfile.TemporaryDirectory(prefix="pt-size-") as tmp:
        work = Path(tmp)
        objs = {}
        for src in sources:
            objs[src.name] = work / (src.stem + ".o")
            run([CC, *CFLAGS, "-fcallgraph-info=su", f"-I{HERE}", "-c", str(src), "-o", str(objs[src.name])],
                work)
        graph = call_graph([obj.with_suffix(".ci") for obj in objs.values()])
        version = run([CC, "--version"], work).splitlines()[0]
        print(f"padtune firmware library on a Cortex-M0+ ({version}; -Os -mcpu=cortex-m0plus -mthumb)")
        print(f"{'part':<46}{'flash B':>9}{'static RAM B':>14}{'stack B':>9}  (deepest call chain)")
        every = list(objs.values())
        parts = link(every, every, work, "all")
        for name, obj in objs.items():
            flash, ram = parts.get(obj.name, (0, 0))
            label = f"{PART_NAMES.get(name, name[:-2])} ({name})"
            print(f"{label:<46}{flash:>9}{ram:>14}{stack_bytes(obj.with_suffix('.ci'), *graph):>9}")
        helpers = [parts.get(k, (0, 0)) for k in ("libgcc", "libc")]
        flash, ram = sum(f for f, _ in helpers), sum(r for _, r in helpers)
        print(f"{'helpers (libgcc, libc)':<46}{flash:>9}{ram:>14}")
        print("  stack: a call into the part at its deepest, through the parts it calls (gcc's frame sizes, "
              "-fcallgraph-info); +cb: add your callbacks' own (put-char, hooks)")
        present = [n for n in TOGETHER if n in objs]
        together = link([objs[n] for n in present], every, work, "together")
        flash, ram = total(together)
        helper_bytes = sum(together.get(k, (0, 0))[0] for k in ("libgcc", "libc"))
        missing = [n for n in TOGETHER if n not in objs]
        label = " + ".join(PART_NAMES[n] for n in present)
        gap = flash - FLASH_GOAL_BYTES
        verdict = f"within the {FLASH_GOAL_BYTES} B goal" if gap <= 0 else \
            f"OVER the {FLASH_GOAL_BYTES} B goal by {gap} B"
        print(f"{label + ' together':<46}{flash:>9}{ram:>14}   {verdict}"
              + (f" (not built yet: {', '.join(missing)})" if missing else "")
              + f", helpers included ({helper_bytes} B of them)")
        sizes = type_sizes(headers, work)
        print("types (caller-owned RAM): " + ", ".join(f"{n} {b} B" for n, b in sizes.items()))
        size = lambda name: sizes.get(name, 0)  # noqa: E731
        verdict = "within" if size("pt_chan_t") <= RAM_PER_CHANNEL_GOAL_BYTES else "OVER"
        print(f"RAM per channel: {size('pt_chan_t')} B of detector state (pt_chan_t), {verdict} the "
              f"{RAM_PER_CHANNEL_GOAL_BYTES} B goal; fixed: pt_detector_t {size('pt_detector_t')} B, "
              f"{size('pt_group_state_t')} B per group, {size('pt_slider_state_t')} B per slider")
        print(f"  a board taking live `set` adds its RAM copy of the settings, {size('pt_settings_t')} B per "
              "channel (pt_settings_t; otherwise they stay in flash); an application that takes events "
              f"gives pt_detect_frame room for one pt_event_t ({size('pt_event_t')} B) per channel, or NULL "
              "and reads states")
    return 0


if __name__ == "__main__":
    sys.exit(main())
