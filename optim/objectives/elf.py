"""Sizes of the sections of an ELF object or program, read from its headers (no binutils needed).

The layout followed is that of the ELF specification ("System V Application
Binary Interface", 1997/2013): the ELF header, the section header table and
the section-name string table, for 32 and 64 bit files of either byte order.
"""

from __future__ import annotations

import struct
from pathlib import Path
from typing import List, NamedTuple

__all__ = ["ElfFormatError", "ElfSection", "elf_sections", "elf_code_size"]

#: Section flags (ELF specification, "System V Application Binary Interface", 1997/2013).
_SHF_ALLOC, _SHF_EXECINSTR = 0x2, 0x4
_SHT_NOBITS = 8
_SHN_XINDEX = 0xFFFF


class ElfFormatError(ValueError):
    """A file is not a well-formed ELF file; the message names the file and the fault."""


class ElfSection(NamedTuple):
    """One section header of an ELF file."""

    name: str
    type: int
    flags: int
    size: int

    @property
    def is_code(self) -> bool:
        """Allocated, executable and stored in the file (like ``.text``)."""
        return (self.flags & (_SHF_ALLOC | _SHF_EXECINSTR)) == (_SHF_ALLOC | _SHF_EXECINSTR) and (
            self.type != _SHT_NOBITS
        )


def elf_sections(path) -> List[ElfSection]:
    """The section headers of an ELF file (32 or 64 bit, either byte order).

    Reads the ELF header and the section header table with :mod:`struct`,
    following the layout of the System V ABI (``e_shoff``, ``e_shentsize``,
    ``e_shnum``, ``e_shstrndx``, with the extended numbering kept in section
    0 when a file has 0xff00 sections or more), and names each section from
    the section-name string table.

    Parameters
    ----------
    path : str or pathlib.Path
        The file.

    Returns
    -------
    list of ElfSection
        In file order, section 0 (the null section) included.

    Raises
    ------
    ElfFormatError
        When the file is not ELF or its headers point outside the file.
    """
    path = Path(path)
    data = path.read_bytes()

    def bad(reason: str) -> ElfFormatError:
        return ElfFormatError(f"{path}: not a readable ELF file: {reason}")

    if len(data) < 16 or data[:4] != b"\x7fELF":
        raise bad("it does not start with the ELF magic bytes")
    width, order = data[4], data[5]
    if width not in (1, 2) or order not in (1, 2):
        raise bad(f"unknown class {width} or data encoding {order}")
    endian = "<" if order == 1 else ">"
    header = struct.Struct(endian + ("16sHHIIIIIHHHHHH" if width == 1 else "16sHHIQQQIHHHHHH"))
    entry = struct.Struct(endian + ("IIIIIIIIII" if width == 1 else "IIQQQQIIQQ"))
    if len(data) < header.size:
        raise bad("the file ends inside the ELF header")
    fields = header.unpack_from(data, 0)
    shoff, shentsize, shnum, shstrndx = fields[6], fields[11], fields[12], fields[13]
    if shoff == 0:
        return []
    if shentsize < entry.size:
        raise bad(f"section headers of {shentsize} bytes; expected at least {entry.size}")

    def read_header(index: int):
        start = shoff + index * shentsize
        if start + entry.size > len(data):
            raise bad(f"section header {index} lies outside the file")
        name, kind, flags, _addr, offset, size, link, _info, _align, _entsize = entry.unpack_from(data, start)
        return name, kind, flags, offset, size, link

    first = read_header(0)
    if shnum == 0:
        shnum = first[4]
    if shstrndx == _SHN_XINDEX:
        shstrndx = first[5]
    if shnum * shentsize > len(data):
        raise bad(f"{shnum} section headers cannot fit in the file")
    headers = [read_header(i) for i in range(shnum)]
    if not 0 <= shstrndx < shnum:
        raise bad(f"the section-name table index {shstrndx} is out of range")
    _, _, _, names_offset, names_size, _ = headers[shstrndx]
    if names_offset + names_size > len(data):
        raise bad("the section-name table lies outside the file")
    names = data[names_offset : names_offset + names_size]
    sections = []
    for index, (name_at, kind, flags, _offset, size, _link) in enumerate(headers):
        end = names.find(b"\0", name_at)
        if name_at >= len(names) or end < 0:
            if name_at == 0 and index == 0:
                end = name_at
            else:
                raise bad(f"the name of section {index} lies outside the section-name table")
        sections.append(ElfSection(names[name_at:end].decode("utf-8", "replace"), kind, flags, size))
    return sections


def elf_code_size(path) -> int:
    """Total size in bytes of the code sections of an ELF file (see :attr:`ElfSection.is_code`)."""
    return int(sum(section.size for section in elf_sections(path) if section.is_code))
