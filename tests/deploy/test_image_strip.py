"""deploy/image-strip.py cuts unmapped sections off shared libraries without changing what loads.

The libraries are real ones from this environment's wheels (PyYAML's extension module, which
carries its debug information after its mapped bytes, and numpy's OpenBLAS, which auditwheel
patched). What the dynamic loader uses is compared byte for byte with the original, the files
are read back with binutils' ``readelf`` where it is installed (an outside reader of the ELF
format), and a trimmed extension module is imported in a fresh interpreter.
"""

from __future__ import annotations

import importlib.util
import os
import shutil
import struct
import subprocess
import sys
from pathlib import Path
from types import ModuleType

import numpy
import pytest
import yaml

STRIP_SCRIPT = Path(__file__).resolve().parents[2] / "deploy" / "image-strip.py"
YAML_EXTENSION = next(Path(yaml.__file__).parent.glob("_yaml.*.so"), None)
NUMPY_LIBS = Path(numpy.__file__).parent.parent / "numpy.libs"
OPENBLAS = next(NUMPY_LIBS.glob("libscipy_openblas*.so"), None)

PT_LOAD = 1


def _load_script() -> ModuleType:
    spec = importlib.util.spec_from_file_location("image_strip", STRIP_SCRIPT)
    assert spec and spec.loader
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


strip = _load_script()


def _segments(data: bytes) -> list[tuple[int, int, int]]:
    """(type, file offset, file size) of each program header: what the loader reads."""
    phoff = struct.unpack_from("<Q", data, 0x20)[0]
    phentsize, phnum = struct.unpack_from("<HH", data, 0x36)
    found = []
    for i in range(phnum):
        kind, _, offset, _, _, filesz, _, _ = struct.unpack_from(
            "<IIQQQQQQ", data, phoff + i * phentsize
        )
        found.append((kind, offset, filesz))
    return found


def _readelf(path: Path, *flags: str) -> str:
    done = subprocess.run(
        ["readelf", "-W", *flags, str(path)], capture_output=True, text=True, check=False
    )
    assert done.returncode == 0 and not done.stderr, done.stderr
    return done.stdout


needs_yaml_extension = pytest.mark.skipif(
    YAML_EXTENSION is None, reason="PyYAML without its C extension"
)
needs_readelf = pytest.mark.skipif(shutil.which("readelf") is None, reason="no binutils")


@needs_yaml_extension
def test_trim_cuts_the_tail_and_keeps_every_mapped_byte() -> None:
    data = YAML_EXTENSION.read_bytes()
    trimmed = strip.trim(data)
    assert trimmed is not None and len(trimmed) < len(data)
    assert _segments(trimmed) == _segments(data)
    end = max(offset + size for _, offset, size in _segments(data))
    assert len(trimmed) > end  # the section-name table and the section headers follow
    # Only the section headers' offset (e_shoff, 8 bytes at 0x28) differs in the mapped part.
    assert trimmed[:0x28] == data[:0x28]
    assert trimmed[0x30:end] == data[0x30:end]
    assert any(kind == PT_LOAD for kind, _, _ in _segments(data))
    assert strip.trim(trimmed) is None  # nothing left to cut


@needs_yaml_extension
@needs_readelf
def test_readelf_reads_the_trimmed_file_like_the_original(tmp_path: Path) -> None:
    copy = tmp_path / YAML_EXTENSION.name
    shutil.copyfile(YAML_EXTENSION, copy)
    assert strip.trim_file(str(copy)) > 0
    # Program headers, dynamic section and dynamic symbols: what the loader uses.
    for flags in (("-l",), ("-d",), ("--dyn-syms",), ("-V",)):
        assert _readelf(copy, *flags) == _readelf(YAML_EXTENSION, *flags), flags
    sections = _readelf(copy, "-S")
    assert ".symtab" in _readelf(YAML_EXTENSION, "-S")
    for line in sections.splitlines():
        if ".symtab" in line or ".debug_" in line:
            assert " NULL " in line, line  # inactive: every other section keeps its index
    assert "STRTAB" in sections  # .dynstr and the section names are still there


@needs_yaml_extension
def test_a_trimmed_extension_module_imports_and_works(tmp_path: Path) -> None:
    copy = tmp_path / YAML_EXTENSION.name
    shutil.copyfile(YAML_EXTENSION, copy)
    assert strip.trim_file(str(copy)) > 0
    code = (
        "import importlib.util, sys\n"
        "spec = importlib.util.spec_from_file_location('yaml._yaml', sys.argv[1])\n"
        "module = importlib.util.module_from_spec(spec)\n"
        "spec.loader.exec_module(module)\n"
        "print(module.get_version_string())\n"
        "parser, scalars = module.CParser('a: [1, 2]'), []\n"
        "while (token := parser.get_token()) is not None:\n"
        "    scalars += [token.value] if hasattr(token, 'value') else []\n"
        "print(scalars)\n"
    )
    done = subprocess.run(
        [sys.executable, "-c", code, str(copy)], capture_output=True, text=True, check=False
    )
    assert done.returncode == 0, done.stderr
    version, loaded = done.stdout.splitlines()
    assert version.count(".") == 2
    assert loaded == "['a', '1', '2']"  # libyaml read a document through the trimmed module


@pytest.mark.skipif(OPENBLAS is None, reason="numpy without its bundled OpenBLAS")
def test_a_library_auditwheel_patched_is_left_alone() -> None:
    # patchelf moved the dynamic tables into a segment after the old end of the file, so the
    # symbol table sits between mapped bytes: cutting it would mean moving a segment.
    data = OPENBLAS.read_bytes()
    end = max(offset + size for _, offset, size in _segments(data))
    if end < len(data) - 4096:
        pytest.skip("this OpenBLAS build does not end with a mapped segment")
    assert strip.trim(data) is None


def test_anything_else_is_left_alone() -> None:
    assert strip.trim(b"") is None
    assert strip.trim(b"not an ELF file at all, just text" * 4) is None
    elf32 = b"\x7fELF\x01\x01\x01" + bytes(57)
    assert strip.trim(elf32) is None
    big_endian = b"\x7fELF\x02\x02\x01" + bytes(57)
    assert strip.trim(big_endian) is None


@needs_yaml_extension
def test_main_trims_in_place_once_per_file_and_keeps_hard_links(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    first = tmp_path / "pkg" / YAML_EXTENSION.name
    first.parent.mkdir()
    shutil.copyfile(YAML_EXTENSION, first)
    second = tmp_path / "pkg" / "same.so"
    os.link(first, second)
    (tmp_path / "pkg" / "notes.txt").write_text("not a library")
    before = first.stat().st_size
    assert strip.main([str(tmp_path)]) == 0
    assert "1 libraries trimmed" in capsys.readouterr().out
    assert first.stat().st_size == second.stat().st_size < before
    assert first.stat().st_ino == second.stat().st_ino
    assert strip.main([str(tmp_path)]) == 0
    assert "0 libraries trimmed" in capsys.readouterr().out
