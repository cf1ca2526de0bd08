"""Checks of a mesh file's bytes before trimesh parses them.

trimesh reads what it can of a damaged file: a binary STL shorter than its header
says, a PLY with fewer elements than declared, an OBJ face naming a vertex that
does not exist. These checks refuse such files with one line naming the file and
what is wrong, and decode text that is not UTF-8 as Latin-1 (every byte is a
character there), so no character-set guessing is needed.
"""

import re
import struct

from ..errors import ModelError

_PLY_SIZES = {"char": 1, "uchar": 1, "int8": 1, "uint8": 1, "short": 2, "ushort": 2, "int16": 2,
              "uint16": 2, "int": 4, "uint": 4, "int32": 4, "uint32": 4, "float": 4, "float32": 4,
              "double": 8, "float64": 8}


def check_bytes(path, kind, data):
    """Raise `ModelError` for an empty file or a damaged STL, PLY or OBJ structure.

    Parameters
    ----------
    path : Path
    kind : {"obj", "off", "stl", "ply"}
    data : bytes
        The whole file.
    """
    where = f"{path}: cannot read as {kind.upper()}"
    if not data.strip():
        raise ModelError(f"{where}: the file is empty")
    if kind == "stl":
        _check_stl(where, data)
    elif kind == "ply":
        _check_ply(where, data)
    elif kind == "obj":
        _check_obj(where, _decode(data))


def text_bytes(kind, data):
    """The file's bytes, text formats re-encoded as UTF-8 (Latin-1 read when not UTF-8)."""
    if kind in ("obj", "off") or (kind == "stl" and _is_ascii_stl(data)):
        return _decode(data).encode("utf-8")
    return data


def _decode(data):
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError:
        return data.decode("latin-1")


def _is_ascii_stl(data):
    return data.lstrip()[:5].lower() == b"solid" and b"\0" not in data[:4096] and not _binary_size_fits(data)


def _binary_size_fits(data):
    return len(data) >= 84 and 84 + 50 * struct.unpack("<I", data[80:84])[0] == len(data)


def _check_stl(path, data):
    if _binary_size_fits(data) or _is_ascii_stl(data):
        return
    if len(data) < 84:
        raise ModelError(f"{path}: {len(data)} bytes is too short for a binary STL (84-byte header) "
                         "and it is not ASCII STL")
    claimed = struct.unpack("<I", data[80:84])[0]
    raise ModelError(f"{path}: the binary STL header says {claimed:,} triangles but the file holds "
                     f"{(len(data) - 84) / 50:,.1f} (50 bytes each)")


def _check_ply(path, data):
    end = data.find(b"end_header")
    if not data.startswith(b"ply") or end < 0:
        raise ModelError(f"{path}: not a PLY file (no 'ply' ... 'end_header' header)")
    header = data[:end].decode("latin-1").split("\n")
    body = data[data.find(b"\n", end) + 1:] if data.find(b"\n", end) >= 0 else b""
    fmt, elements = None, []
    for line in header:
        words = line.split()
        if words[:1] == ["format"] and len(words) > 1:
            fmt = words[1]
        elif words[:1] == ["element"] and len(words) == 3 and words[2].isdigit():
            elements.append([words[1], int(words[2]), 0, False])
        elif words[:1] == ["property"] and elements:
            if words[1:2] == ["list"] and len(words) >= 4:
                elements[-1][2] += _PLY_SIZES.get(words[2], 1) + 3 * _PLY_SIZES.get(words[3], 1)
                elements[-1][3] = True
            elif len(words) >= 2:
                elements[-1][2] += _PLY_SIZES.get(words[1], 1)
    declared = sum(count for _, count, _, _ in elements)
    if fmt == "ascii":
        rows = sum(1 for line in body.split(b"\n") if line.strip())
        if rows < declared:
            counts = ", ".join(f"{count:,} {name}" for name, count, _, _ in elements)
            raise ModelError(f"{path}: the PLY header declares {counts} but the file has only {rows:,} data lines")
    elif fmt is not None:
        least = sum(count * size for _, count, size, _ in elements)
        if len(body) < least:
            counts = ", ".join(f"{count:,} {name}" for name, count, _, _ in elements)
            raise ModelError(f"{path}: the PLY header declares {counts} but the file ends after "
                             f"{len(body):,} bytes of data, fewer than they need")


_INDEX = re.compile(r"[+-]?\d+")


def _check_obj(path, text):
    """Every face index names an existing vertex: 1..V, or -1..-n counting back from the face."""
    seen = 0
    for number, line in enumerate(text.splitlines(), start=1):
        words = line.split()
        if not words:
            continue
        if words[0] == "v":
            seen += 1
        elif words[0] == "f":
            for word in words[1:]:
                first = word.split("/")[0]
                if len(first) > 18 or not _INDEX.fullmatch(first):
                    raise ModelError(f"{path}: line {number}: face index {first[:20]!r} is not an integer")
                index = int(first)
                if index == 0 or index < -seen:
                    raise ModelError(f"{path}: line {number}: face index {index} does not name a vertex "
                                     f"({seen:,} defined so far; use 1..N, or -1..-{max(seen, 1)} counting back)")
    if seen:
        _check_obj_forward(path, text, seen)


def _check_obj_forward(path, text, total):
    for number, line in enumerate(text.splitlines(), start=1):
        words = line.split()
        if words[:1] == ["f"]:
            for word in words[1:]:
                index = int(word.split("/")[0])
                if index > total:
                    raise ModelError(f"{path}: line {number}: face index {index} out of range (1..{total:,})")
