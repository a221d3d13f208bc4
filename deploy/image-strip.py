"""Cut the symbol tables and debug information off the end of shared libraries, without binutils.

    python image-strip.py FOLDER...

deploy/Containerfile runs this on the runtime venv. A shared library (or Python extension
module) is what its program headers map into memory; its static symbol table (``.symtab``,
``.strtab``), debug sections (``.debug_*``), ``.comment`` and the like are never mapped, and
the dynamic loader never reads them. Most wheels' libraries keep those bytes after the last
mapped byte of the file (pyarrow's alone carry about 20 MB, uvloop's extension 12 MB). This
script cuts exactly that tail, keeps the section-name table, and writes a new section header
table after it, where the dropped sections are inactive (``SHT_NULL``) entries so that every
section keeps its index. Every byte any program header covers stays as it was: the only change
inside them is the ELF header's field that says where the section headers are. The script
checks that on every file it changes, and that the dynamic loader still opens each of them.

It leaves a file alone whenever it is anything else than the plain case: not a little-endian
64-bit ELF shared object, extended section numbering, a section that crosses the end of the
mapped bytes, an allocated section beyond them, or a kept section that refers to a dropped
one. In particular the libraries that auditwheel patched (patchelf appends the relocated
dynamic tables as a new segment after the old end, so their symbol tables sit in the middle of
the file) are left as they are. It needs only Python, so the image build needs no compiler
tools and no package index for it.
"""

from __future__ import annotations

import os
import struct
import subprocess
import sys
from collections.abc import Iterator

__all__ = ["main", "trim", "trim_file"]

# ELF64, little-endian: the header, a program header, a section header.
_EHDR = struct.Struct("<16sHHIQQQIHHHHHH")
_PHDR = struct.Struct("<IIQQQQQQ")
_SHDR = struct.Struct("<IIQQQQIIQQ")
_E_SHOFF = 0x28  # where the header keeps the section headers' file offset (8 bytes)
_ET_DYN = 3
_SHT_NULL, _SHT_NOBITS, _SHT_REL, _SHT_RELA = 0, 8, 9, 4
_SHF_ALLOC, _SHF_INFO_LINK = 0x2, 0x40
_SHN_LORESERVE = 0xFF00


def _mapped_end(data: bytes, phoff: int, phnum: int, phentsize: int) -> int:
    """The end of the last byte any program header covers (and of the headers themselves)."""
    end = max(_EHDR.size, phoff + phnum * phentsize)
    for i in range(phnum):
        _, _, offset, _, _, filesz, _, _ = _PHDR.unpack_from(data, phoff + i * phentsize)
        end = max(end, offset + filesz)
    return end


def trim(data: bytes) -> bytes | None:
    """The library without the unmapped sections after its mapped bytes, or None to leave it.

    Parameters
    ----------
    data
        The whole file.

    Returns
    -------
    bytes or None
        The new file, or None when the file is not a plain ELF64 little-endian shared object
        with something to cut (see the module's docstring for every case left alone).
    """
    if len(data) < _EHDR.size or data[:4] != b"\x7fELF" or data[4:6] != b"\x02\x01":
        return None
    header = _EHDR.unpack_from(data)
    e_type, phoff, shoff = header[1], header[5], header[6]
    phentsize, phnum, shentsize, shnum, shstrndx = header[9:14]
    if e_type != _ET_DYN or phentsize != _PHDR.size or shentsize != _SHDR.size:
        return None
    if phnum == 0 or shnum == 0 or shstrndx == 0 or shstrndx >= min(shnum, _SHN_LORESERVE):
        return None
    if phoff + phnum * phentsize > len(data) or shoff + shnum * shentsize > len(data):
        return None
    end = _mapped_end(data, phoff, phnum, phentsize)
    if end > len(data):
        return None
    sections = [list(_SHDR.unpack_from(data, shoff + i * shentsize)) for i in range(shnum)]
    moved: list[int] = []
    dropped: set[int] = set()
    for index, (_, kind, flags, _, offset, size, *_) in enumerate(sections):
        if index == 0 or kind in (_SHT_NULL, _SHT_NOBITS) or offset + size <= end:
            continue
        if offset < end or flags & _SHF_ALLOC or offset + size > len(data):
            return None
        if index == shstrndx:
            moved.append(index)
        else:
            dropped.add(index)
    if not dropped:
        return None
    for index, section in enumerate(sections):
        if index in dropped:
            continue
        kind, flags, link, info = section[1], section[2], section[6], section[7]
        if link in dropped or (
            (kind in (_SHT_REL, _SHT_RELA) or flags & _SHF_INFO_LINK) and info in dropped
        ):
            return None
    out = bytearray(data[:end])
    for index in moved:
        section = sections[index]
        out += bytes(-len(out) % max(section[8], 1))
        start = section[4]
        section[4] = len(out)
        out += data[start : start + section[5]]
    for index in dropped:
        # Inactive, with its name kept: every other section keeps its index.
        sections[index] = [sections[index][0], _SHT_NULL, 0, 0, 0, 0, 0, 0, 0, 0]
    out += bytes(-len(out) % 8)
    new_shoff = len(out)
    for section in sections:
        out += _SHDR.pack(*section)
    struct.pack_into("<Q", out, _E_SHOFF, new_shoff)
    # What the loader maps is unchanged but for the one field.
    unchanged = (
        out[:_E_SHOFF] == data[:_E_SHOFF] and out[_E_SHOFF + 8 : end] == data[_E_SHOFF + 8 : end]
    )
    if not unchanged or _mapped_end(out, phoff, phnum, phentsize) != end:
        raise AssertionError("trimming changed mapped bytes")  # cannot happen; checked anyway
    return bytes(out)


def trim_file(path: str) -> int:
    """Trim one file in place (hard links keep sharing it); return the bytes saved."""
    with open(path, "rb") as fh:
        if fh.read(4) != b"\x7fELF":
            return 0
        fh.seek(0)
        data = fh.read()
    new = trim(data)
    if new is None:
        return 0
    with open(path, "r+b") as fh:
        fh.write(new)
        fh.truncate()
    return len(data) - len(new)


def _libraries(folders: list[str]) -> Iterator[str]:
    seen: set[tuple[int, int]] = set()
    for folder in folders:
        for top, _, files in os.walk(folder):
            for name in sorted(files):
                path = os.path.join(top, name)
                if ".so" not in name or os.path.islink(path) or not os.path.isfile(path):
                    continue
                stat = os.stat(path)
                if (stat.st_dev, stat.st_ino) not in seen:
                    seen.add((stat.st_dev, stat.st_ino))
                    yield path


def main(argv: list[str]) -> int:
    """Trim every shared library under the folders; check that each still loads."""
    changed, saved = [], 0
    for path in _libraries(argv):
        cut = trim_file(path)
        if cut:
            changed.append(path)
            saved += cut
    # The dynamic loader must still open each one (in a fresh process, with this Python's own
    # symbols there for the extension modules). The process then leaves at once: an extension
    # opened this way was never initialised as a module, and some (pybind11's, as matplotlib's
    # ft2font, untrimmed too) abort in their exit-time destructors, which say nothing about
    # whether the loader could open them.
    check = "import ctypes, os, sys\nfor p in sys.argv[1:]: ctypes.CDLL(p)\nos._exit(0)"
    done = subprocess.run([sys.executable, "-c", check, *changed], check=False)
    if done.returncode != 0:
        print("image-strip: a trimmed library no longer loads", file=sys.stderr)
        return 1
    print(f"image-strip: {len(changed)} libraries trimmed, {saved / 1e6:.1f} MB saved")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
