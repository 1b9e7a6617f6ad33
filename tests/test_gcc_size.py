"""The GCC flag-tuning example and the ELF section reader behind its score.

The ELF reader is checked against hand-built files laid out by the System V
ABI ("System V Application Binary Interface", ELF chapter, SCO/Tool
Interface Standards 1997; the 64-bit layout of the gABI update, 2013), and
against binutils' ``readelf -S -W`` and ``objdump -h`` when they are
installed. Tests that compile need ``gcc`` and are skipped without it.
"""

import re
import shutil
import struct
import subprocess
from collections import Counter
from pathlib import Path

import numpy as np
import pytest

from optim.runs.config import load_run_config
from optim.runs.runner import build_problem, execute
from optim.objectives.command import CommandProblem
from optim.objectives.elf import ElfFormatError, elf_code_size, elf_sections

ROOT = Path(__file__).resolve().parents[1]
SOURCE = ROOT / "examples" / "gcc-size" / "wordfreq.c"
CONFIG = ROOT / "configs" / "gcc-size.yaml"

needs_gcc = pytest.mark.skipif(shutil.which("gcc") is None, reason="no C compiler: gcc is not on PATH")
needs_readelf = pytest.mark.skipif(shutil.which("readelf") is None, reason="binutils' readelf is not installed")
needs_objdump = pytest.mark.skipif(shutil.which("objdump") is None, reason="binutils' objdump is not installed")

SHT_PROGBITS, SHT_STRTAB, SHT_NOBITS = 1, 3, 8
ALLOC, WRITE, EXEC = 0x2, 0x1, 0x4


# ---------------------------------------------------------------- hand-built ELF files


def build_elf(bits, order, sections, extended=False):
    """Bytes of a relocatable ELF file with the given sections (name, type, flags, size).

    Laid out by the System V ABI: ELF header, section contents, the
    section-name table, then the section header table. With ``extended``
    the header's e_shnum is 0 and e_shstrndx is SHN_XINDEX (0xffff), and
    section 0 carries the real values (sh_size and sh_link).
    """
    endian = "<" if order == "little" else ">"
    header_format = "16sHHIIIIIHHHHHH" if bits == 32 else "16sHHIQQQIHHHHHH"
    entry_format = "IIIIIIIIII" if bits == 32 else "IIQQQQIIQQ"
    header_size, entry_size = struct.calcsize(header_format), struct.calcsize(entry_format)
    names = bytearray(b"\0")
    name_at = []
    for name, *_ in sections + [(".shstrtab",)]:
        name_at.append(len(names))
        names += name.encode() + b"\0"
    body = bytearray(header_size)
    placed = []
    for (_name, kind, flags, size), at in zip(sections, name_at[:-1], strict=True):
        placed.append((at, kind, flags, len(body), size))
        if kind != SHT_NOBITS:
            body += bytes(range(256)) * (size // 256) + bytes(size % 256)
    names_offset = len(body)
    body += names
    body += bytes(-len(body) % 8)
    shoff = len(body)
    count = len(sections) + 2
    strndx = count - 1
    rows = [(0, 0, 0, 0, 0, count if extended else 0, strndx if extended else 0, 0, 0, 0)]
    for at, kind, flags, offset, size in placed:
        rows.append((at, kind, flags, 0, offset, size, 0, 0, 1, 0))
    rows.append((name_at[-1], SHT_STRTAB, 0, 0, names_offset, len(names), 0, 0, 1, 0))
    for row in rows:
        body += struct.pack(endian + entry_format, *row)
    ident = b"\x7fELF" + bytes([1 if bits == 32 else 2, 1 if order == "little" else 2, 1]) + bytes(9)
    machine = 62 if bits == 64 else 8  # x86-64, MIPS
    header = struct.pack(
        endian + header_format,
        ident,
        1,
        machine,
        1,
        0,
        0,
        shoff,
        0,
        header_size,
        0,
        0,
        entry_size,
        0 if extended else count,
        0xFFFF if extended else strndx,
    )
    body[:header_size] = header
    return bytes(body)


SAMPLE = [
    (".text", SHT_PROGBITS, ALLOC | EXEC, 300),
    (".data", SHT_PROGBITS, ALLOC | WRITE, 40),
    (".text.startup", SHT_PROGBITS, ALLOC | EXEC, 77),
    (".bss", SHT_NOBITS, ALLOC | WRITE, 64),
    (".odd.nobits", SHT_NOBITS, ALLOC | EXEC, 500),  # executable but not stored in the file: not code
    (".debug.exec", SHT_PROGBITS, EXEC, 90),  # executable but not allocated: not code
    (".init", SHT_PROGBITS, ALLOC | EXEC, 9),
]
SAMPLE_CODE = 300 + 77 + 9  # by the definition: allocated, executable, stored in the file


@pytest.mark.parametrize(
    "bits, order, extended", [(64, "little", False), (32, "big", False), (32, "little", True), (64, "big", True)]
)
def test_the_reader_finds_every_section_of_a_hand_built_file(tmp_path, bits, order, extended):
    path = tmp_path / "sample.o"
    path.write_bytes(build_elf(bits, order, SAMPLE, extended=extended))
    sections = elf_sections(path)
    assert [(s.name, s.type, s.flags, s.size) for s in sections[1:-1]] == SAMPLE
    assert sections[0].name == "" and sections[-1].name == ".shstrtab"
    assert [s.name for s in sections if s.is_code] == [".text", ".text.startup", ".init"]
    assert elf_code_size(path) == SAMPLE_CODE


def test_malformed_files_are_reported_with_the_file_named(tmp_path):
    good = build_elf(64, "little", SAMPLE)
    cases = {
        "text.o": b"just some text, not an object file\n",
        "short.o": good[:30],
        "class.o": good[:4] + b"\x07" + good[5:],
        "cut.o": good[:-10],  # the last section header is cut off
    }
    for name, data in cases.items():
        (tmp_path / name).write_bytes(data)
        with pytest.raises(ElfFormatError, match=re.escape(str(tmp_path / name)) + ": not a readable ELF file"):
            elf_sections(tmp_path / name)


def _readelf_sections(path):
    """(name, size, allocated-and-executable) of each section after 0, from ``readelf -S -W``."""
    text = subprocess.run(["readelf", "-S", "-W", str(path)], capture_output=True, text=True, check=True).stdout
    found = []
    for line in text.splitlines():
        match = re.match(r"^\s*\[\s*(\d+)\]\s+(.*)$", line)
        if not match or match.group(1) == "0":
            continue
        tokens = match.group(2).split()
        if len(tokens) not in (9, 10) or tokens[0] == "Name":
            continue
        flags = tokens[6] if len(tokens) == 10 else ""
        found.append((tokens[0], int(tokens[4], 16), "A" in flags and "X" in flags))
    return found


@needs_readelf
@pytest.mark.parametrize("bits, order, extended", [(64, "little", False), (32, "big", False), (64, "big", True)])
def test_readelf_agrees_on_hand_built_files(tmp_path, bits, order, extended):
    path = tmp_path / "sample.o"
    path.write_bytes(build_elf(bits, order, SAMPLE, extended=extended))
    ours = [(s.name, s.size, bool(s.flags & ALLOC and s.flags & EXEC)) for s in elf_sections(path)[1:]]
    assert ours == _readelf_sections(path)


@pytest.fixture(scope="module")
def compiled(tmp_path_factory):
    """wordfreq.c compiled with -Os -c, and with -O2 -c."""
    if shutil.which("gcc") is None:
        pytest.skip("no C compiler: gcc is not on PATH")
    folder = tmp_path_factory.mktemp("gcc")
    objects = {}
    for level in ("-Os", "-O2"):
        out = folder / f"wordfreq{level}.o"
        subprocess.run(["gcc", level, "-c", str(SOURCE), "-o", str(out)], check=True, capture_output=True)
        objects[level] = out
    return objects


@needs_readelf
def test_readelf_agrees_on_compiled_objects(compiled):
    for path in compiled.values():
        theirs = _readelf_sections(path)
        assert [(s.name, s.size, s.is_code) for s in elf_sections(path)[1:]] == theirs
        assert elf_code_size(path) == sum(size for _, size, code in theirs if code)


@needs_objdump
def test_objdump_code_sections_add_up_to_the_code_size(compiled):
    for path in compiled.values():
        text = subprocess.run(["objdump", "-h", str(path)], capture_output=True, text=True, check=True).stdout
        lines = text.splitlines()
        total = 0
        for index, line in enumerate(lines[:-1]):
            fields = line.split()
            if len(fields) >= 7 and fields[0].isdigit() and "CODE" in lines[index + 1]:
                total += int(fields[2], 16)
        assert total > 0 and elf_code_size(path) == total


# ---------------------------------------------------------------- the example program


def _reference_counts(text, min_letters=1):
    """Words as wordfreq.c defines them, counted with Python's re and collections.Counter."""
    words = [w.lower() for w in re.findall(r"[A-Za-z]+(?:'[A-Za-z]+)*", text)]
    return Counter(w for w in words if sum(c.isalpha() for c in w) >= min_letters)


@needs_gcc
def test_the_example_program_counts_words_like_a_python_reference(tmp_path):
    program = tmp_path / "wordfreq"
    subprocess.run(
        ["gcc", "-std=c99", "-Wall", "-Werror", "-Os", str(SOURCE), "-o", str(program)], check=True, capture_output=True
    )
    rng = np.random.default_rng(5)
    vocabulary = [
        "Tide",
        "harbour",
        "can't",
        "KELP",
        "gull",
        "o'er",
        "net",
        "a",
        "lighthouse",
        "ferry's",
        "Rope",
        "salt",
        "mast",
        "buoy",
        "wave",
        "i",
    ]
    separators = [" ", "  ", ", ", ". ", "\n", "--", " 42 ", "'", "; "]
    pieces = []
    for _ in range(3000):
        pieces.append(vocabulary[rng.integers(len(vocabulary))])
        pieces.append(separators[rng.integers(len(separators))])
    text = "".join(pieces)
    (tmp_path / "tale.txt").write_text(text)
    for min_letters in (1, 4):
        out = subprocess.run(
            [str(program), "-n", "8", "-m", str(min_letters), str(tmp_path / "tale.txt")],
            capture_output=True,
            text=True,
            check=True,
        ).stdout.splitlines()
        counts = _reference_counts(text, min_letters)
        ranked = sorted(counts.items(), key=lambda item: (-item[1], item[0].encode()))
        assert out[0] == f"words {sum(counts.values())}" and out[1] == f"distinct {len(counts)}"
        assert [tuple(line.split()) for line in out[2:]] == [(str(c), w) for w, c in ranked[:8]]


@needs_gcc
def test_the_config_lists_about_25_flags_this_gcc_accepts_and_starts_from_the_baseline():
    problem = build_problem(load_run_config(CONFIG))
    assert isinstance(problem, CommandProblem) and 20 <= problem.n <= 30
    assert problem.goal == "minimize" and problem.score.mode == "elf_code_size"
    np.testing.assert_array_equal(problem.initial_candidates(), np.zeros((1, problem.n)))
    assert problem.arguments(np.zeros(problem.n, np.uint8))[:3] == ["gcc", "-Os", "-c"]
    # every flag at once (value 1, then each variable's last value): gcc must accept them all
    for x in (np.ones(problem.n, np.uint8), (problem.cardinality - 1).astype(np.uint8)):
        assert problem.evaluate_one(x) > 0


@needs_gcc
def test_a_short_run_never_ends_worse_than_the_baseline(tmp_path, compiled):
    baseline = elf_code_size(compiled["-Os"])
    config = load_run_config(CONFIG, ["search.population=12", "stop.evaluations=36", f"out={tmp_path}"])
    outcome = execute(config)
    candidates, scores, _ = outcome.folder.read_evaluated()
    np.testing.assert_array_equal(candidates[0], np.zeros(outcome.problem.n))
    assert scores[0] == baseline
    assert outcome.result.evaluations == 36 and outcome.result.failures == 0
    assert outcome.result.best_score <= baseline
