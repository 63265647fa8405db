"""Read and write the cube volumetric format that quantum-chemistry codes write.

Layout (common practice; see the format notes by P. Bourke, 2003, and the
cube writer of PySCF, ``pyscf/tools/cubegen.py``):

1. two free-text comment lines;
2. atom count and origin (optionally a fifth number: values per point);
3. three axis lines: point count and step vector (a positive count means
   bohr, a negative one angstrom);
4. one line per atom: Z, nuclear charge, x, y, z;
5. only when the atom count is negative: a line ``m id_1 ... id_m`` naming
   the m datasets stored per point (orbitals, for instance);
6. the values, the last grid axis varying fastest (and, with several
   datasets, the dataset index fastest of all).

Files ending in ``.gz``, ``.bz2`` or ``.xz`` are decompressed transparently.
Everything is returned in bohr.  When the axis counts are negative, the
origin, steps and atom positions are all taken to be in angstrom (the file is
then in angstrom throughout) and converted.
"""

from __future__ import annotations

import bz2
import gzip
import lzma
import math
import os
import warnings
from pathlib import Path

import numpy as np

from trackscan.errors import InputError, ParseError
from trackscan.grid import DensityGrid
from trackscan.io.atomic import atomic_open
from trackscan.io.filecheck import regular_file_problem
from trackscan.units import ANGSTROM_IN_BOHR

__all__ = ["read_cube", "read_cube_header", "write_cube", "parse_cube_header", "CubeHeader",
           "DEFAULT_MAX_POINTS"]

DEFAULT_MAX_POINTS = 512 ** 3
"""Largest grid (points times datasets) a cube may claim before it is refused unread."""

_OPENERS = {".gz": gzip.open, ".bz2": bz2.open, ".xz": lzma.open}

MAX_HEADER_MAGNITUDE = 1e6
"""Largest magnitude of a coordinate, step or charge in a header (bohr or Å):
larger ones are damage (1e300 overflows the geometry)."""

MAX_HEADER_BYTES = 1 << 24
"""Longest header read (16 MiB: 100000 atom lines of 80 characters fit in half).
A longer one is refused, so a file without line breaks is never read whole."""

MAX_BYTES_PER_VALUE = 40
"""Longest text one value of the block may take on average, separators included
(``%.16E`` values with a space take 24).  The value block is read, decompressed,
only up to this many bytes per value the header's grid needs, so a compressed
file that inflates to far more than its grid (a decompression bomb) is refused
after reading a bounded amount."""

_BODY_SLACK = 1 << 16   # bytes allowed beyond the per-value bound (trailing blank lines)


class CubeHeader:
    """What the header of a cube file says (all lengths in bohr).

    Attributes
    ----------
    comments : tuple of str
        The two comment lines.
    origin : (3,) float64 array
    counts : (3,) int array
        Points along each axis (absolute values).
    axes : (3, 3) float64 array
        Step vectors as rows.
    numbers : (n,) int array
    charges : (n,) float64 array
    positions : (n, 3) float64 array
    dataset_ids : list of int
        Identifiers of the datasets stored per point (``[]`` for one
        unnamed dataset).
    n_values_per_point : int
    angstrom : bool
        True when the file gave its lengths in angstrom.
    header_lines : int
        Number of lines before the values start.
    """

    __slots__ = ("comments", "origin", "counts", "axes", "numbers", "charges",
                 "positions", "dataset_ids", "n_values_per_point", "angstrom",
                 "header_lines")

    def __init__(self, **kw):
        for k in self.__slots__:
            setattr(self, k, kw[k])

    @property
    def n_points(self) -> int:
        """Number of grid points (exact: Python integers cannot wrap)."""
        return math.prod(int(c) for c in self.counts)


def _numbers(line: str, lineno: int, path, what: str, n_min: int, n_max: int,
             integer_first: bool = False):
    parts = line.split()
    if not (n_min <= len(parts) <= n_max):
        want = str(n_min) if n_min == n_max else f"{n_min} to {n_max}"
        raise ParseError(f"expected {want} numbers ({what}), got {len(parts)}: {line.strip()[:60]!r}",
                         path, lineno)
    out = []
    for i, p in enumerate(parts):
        try:
            if integer_first and i == 0:
                out.append(int(p))
            else:
                v = float(p.replace("D", "E").replace("d", "e"))
                if not np.isfinite(v):
                    raise ValueError
                if abs(v) > MAX_HEADER_MAGNITUDE:
                    raise ParseError(f"number {p} out of range ({what}; the magnitude must "
                                     f"not pass {MAX_HEADER_MAGNITUDE:g})", path, lineno)
                out.append(v)
        except ValueError:
            raise ParseError(f"not a valid number {p!r} ({what})", path, lineno) from None
    return out


def parse_cube_header(lines, *, path=None, max_points: int = DEFAULT_MAX_POINTS) -> CubeHeader:
    """Parse the header of a cube file from its first lines.

    Parameters
    ----------
    lines : sequence of str
        At least the header lines of the file (more are ignored).
    path : str, optional
        File name for error messages.
    max_points : int
        Refuse a header claiming more than this many values.

    Returns
    -------
    CubeHeader

    Raises
    ------
    ParseError
        On any malformed or implausible header, naming the line.
    """
    lines = list(lines)

    def line(i):
        if i >= len(lines):
            raise ParseError(f"file ends in the header (line {i + 1} missing)", path, i + 1)
        return lines[i]

    comments = (line(0).rstrip("\r\n"), line(1).rstrip("\r\n"))
    head = _numbers(line(2), 3, path, "atom count and origin x y z [values per point]", 4, 5,
                    integer_first=True)
    natoms = int(head[0])
    origin = np.array(head[1:4], dtype=np.float64)
    nval = 1
    if len(head) == 5:
        if float(head[4]) != int(head[4]) or int(head[4]) < 1:
            raise ParseError(f"values per point must be a positive integer, got {head[4]}", path, 3)
        nval = int(head[4])
    if natoms == 0:
        raise ParseError("the file declares zero atoms", path, 3)
    if abs(natoms) > 100000:
        raise ParseError(f"implausible atom count {natoms}", path, 3)
    counts = np.zeros(3, dtype=np.int64)
    axes = np.zeros((3, 3))
    signs = []
    for a in range(3):
        vals = _numbers(line(3 + a), 4 + a, path, "point count and step vector x y z", 4, 4,
                        integer_first=True)
        n = int(vals[0])
        if n == 0:
            raise ParseError(f"axis {a + 1} has zero points", path, 4 + a)
        if abs(n) > max_points:
            raise ParseError(f"axis {a + 1} claims {abs(n)} points, more than the ceiling of "
                             f"{max_points} values (raise max_points to read it)", path, 4 + a)
        signs.append(n < 0)
        counts[a] = abs(n)
        axes[a] = vals[1:4]
    if len(set(signs)) > 1:
        raise ParseError("axis point counts mix positive (bohr) and negative (angstrom) signs",
                         path, 4)
    angstrom = signs[0]
    with np.errstate(all="ignore"):
        volume = abs(np.linalg.det(axes))
    if not volume > 1e-14:
        raise ParseError("the three step vectors are linearly dependent (zero cell volume)", path, 4)
    total = math.prod(int(c) for c in counts) * nval
    if total > max_points:
        raise ParseError(f"header claims {'x'.join(map(str, counts))} = {total} values, more than "
                         f"the ceiling of {max_points} (raise max_points to read it)", path, 4)
    n = abs(natoms)
    numbers = np.zeros(n, dtype=np.int64)
    charges = np.zeros(n)
    positions = np.zeros((n, 3))
    for i in range(n):
        vals = _numbers(line(6 + i), 7 + i, path, "atom: Z charge x y z", 5, 5, integer_first=True)
        if not 0 <= vals[0] <= 118:
            raise ParseError(f"atomic number {vals[0]} out of range", path, 7 + i)
        numbers[i] = vals[0]
        charges[i] = vals[1]
        positions[i] = vals[2:5]
    header_lines = 6 + n
    dataset_ids: list = []
    if natoms < 0:
        if nval != 1:
            raise ParseError("a negative atom count (dataset ids follow) and a values-per-point "
                             "count cannot both be given", path, 3)
        text = line(header_lines)
        parts = text.split()
        try:
            ids = [int(p) for p in parts]
        except ValueError:
            raise ParseError(f"expected the dataset id line 'm id_1 ... id_m', got {text.strip()[:60]!r}",
                             path, header_lines + 1) from None
        if not ids or ids[0] < 1:
            raise ParseError("dataset id line must start with a positive count", path, header_lines + 1)
        m = ids[0]
        # the ids may continue on following lines when there are many
        rest = ids[1:]
        k = header_lines + 1
        while len(rest) < m:
            more = line(k).split()
            try:
                rest.extend(int(p) for p in more)
            except ValueError:
                raise ParseError(f"dataset id line lists {len(rest)} of {m} ids", path, k + 1) from None
            k += 1
        if len(rest) != m:
            raise ParseError(f"dataset id line claims {m} ids but lists {len(rest)}", path,
                             header_lines + 1)
        dataset_ids = rest
        nval = m
        header_lines = k
        total = math.prod(int(c) for c in counts) * nval
        if total > max_points:
            raise ParseError(f"header claims {total} values, more than the ceiling of {max_points}",
                             path, header_lines)
    if angstrom:
        origin = origin * ANGSTROM_IN_BOHR
        axes = axes * ANGSTROM_IN_BOHR
        positions = positions * ANGSTROM_IN_BOHR
    return CubeHeader(comments=comments, origin=origin, counts=counts, axes=axes,
                      numbers=numbers, charges=charges, positions=positions,
                      dataset_ids=dataset_ids, n_values_per_point=nval, angstrom=angstrom,
                      header_lines=header_lines)


_HEAD_CHUNK = 1 << 16
_FORTRAN_EXPONENT = bytes.maketrans(b"Dd", b"Ee")


def _open(path: Path):
    """Open a cube (decompressing by suffix) for binary reading, or raise InputError.

    Only regular files are opened (checked with ``os.stat`` first): a FIFO
    would block and a device would never end.
    """
    problem = regular_file_problem(path)
    if problem == "is a directory":
        raise InputError("is a directory, not a cube file", path)
    if problem is not None:
        raise InputError(problem, path)
    opener = _OPENERS.get(path.suffix.lower(), open)
    try:
        return opener(path, "rb")
    except PermissionError:
        raise InputError("permission denied (cannot read the file)", path) from None
    except OSError as exc:
        raise InputError(f"cannot read the file ({exc})", path) from None


def _read_errors(path: Path):
    """Context translating read failures of compressed or plain files to InputError."""
    import contextlib

    @contextlib.contextmanager
    def guard():
        try:
            yield
        except PermissionError:
            raise InputError("permission denied (cannot read the file)", path) from None
        except (OSError, EOFError, lzma.LZMAError) as exc:
            raise InputError(f"cannot read the file ({exc})", path) from None
    return guard()


def _line_break(head: bytes) -> bytes:
    """The line break of a file: ``\\n`` (also for CRLF), or ``\\r`` for CR-only files."""
    return b"\r" if b"\n" not in head and b"\r" in head else b"\n"


def _read_header(fh, path: Path, max_points: int):
    """Parse the header from the start of an open file.

    Reads growing chunks (at most :data:`MAX_HEADER_BYTES`) until the header
    is complete, so a file's value block is never read here.

    Returns
    -------
    (CubeHeader, int, bytes)
        The header, the byte offset of the values and the line break.
    """
    size = _HEAD_CHUNK
    while True:
        fh.seek(0)
        head = fh.read(size)
        if not head.strip():
            raise ParseError("empty file", path)
        brk = _line_break(head)
        lines = head.decode("latin-1").split(brk.decode())
        complete = len(head) < size
        try:
            header = parse_cube_header(lines if complete else lines[:-1], path=path,
                                       max_points=max_points)
        except ParseError as exc:
            if complete or "file ends in the header" not in exc.message:
                raise
            _grow(size, len(lines), path)
            size *= 4
            continue
        offset = 0
        for _ in range(header.header_lines):
            nl = head.find(brk, offset)
            if nl < 0:
                if complete:
                    raise ParseError("file ends in the header", path, header.header_lines)
                break
            offset = nl + 1
        else:
            return header, offset, brk
        _grow(size, len(lines), path)
        size *= 4


def _grow(size: int, n_lines: int, path):
    """Refuse to read more than MAX_HEADER_BYTES while looking for the header's end."""
    if size >= MAX_HEADER_BYTES:
        raise ParseError(f"no complete cube header in the first {size} bytes "
                         f"({n_lines} line(s)): not a cube file", path, None if n_lines > 1 else 1)


def read_cube_header(path, *, max_points: int = DEFAULT_MAX_POINTS) -> CubeHeader:
    """Read only the header of a cube file (atoms, grid), not its values.

    Parameters
    ----------
    path : str or os.PathLike
    max_points : int
        Refuse a header claiming more values than this.

    Returns
    -------
    CubeHeader
    """
    path = Path(path)
    with _read_errors(path), _open(path) as fh:
        return _read_header(fh, path, max_points)[0]


def _body_limit(header: CubeHeader) -> int:
    """Most bytes the value block of this header may take (see MAX_BYTES_PER_VALUE)."""
    return header.n_points * header.n_values_per_point * MAX_BYTES_PER_VALUE + _BODY_SLACK


def _locate_bad_value(body: bytes, first_line: int, path, brk: bytes = b"\n"):
    """Find the first token of the value block that is not a finite number."""
    for offset, raw in enumerate(body.split(brk)):
        for tok in raw.split():
            try:
                v = float(tok.replace(b"D", b"E").replace(b"d", b"e"))
            except ValueError:
                shown = tok.decode("utf-8", "replace")[:30]
                raise ParseError(f"not a number in the values: {shown!r}", path,
                                 first_line + offset) from None
            if not np.isfinite(v):
                raise ParseError(f"non-finite value {tok.decode()!r} in the density values", path,
                                 first_line + offset)


def read_cube(path, *, dataset: int = 0, max_points: int = DEFAULT_MAX_POINTS) -> DensityGrid:
    """Read a cube file into a :class:`~trackscan.grid.DensityGrid` (bohr).

    Parameters
    ----------
    path : str or os.PathLike
        The file; ``.gz``, ``.bz2`` and ``.xz`` are decompressed.
    dataset : int
        Which dataset to return when the file stores several per point
        (0-based index into the dataset id line).
    max_points : int
        Refuse, before allocating, a header claiming more values than this.

    Returns
    -------
    DensityGrid

    Raises
    ------
    InputError
        Missing, unreadable or compressed-but-broken file.
    ParseError
        Malformed header, too few or too many values, a value that is not
        a finite number.  The message names the file and, where there is
        one, the line.

    Examples
    --------
    >>> import numpy as np, tempfile, os
    >>> from trackscan.grid import DensityGrid
    >>> g = DensityGrid(np.arange(8.0).reshape(2, 2, 2), [0, 0, 0], np.eye(3) * 0.2,
    ...                 [1], [1.0], [[0.1, 0.1, 0.1]])
    >>> fn = os.path.join(tempfile.mkdtemp(), "t.cube")
    >>> write_cube(fn, g)
    >>> read_cube(fn).values[1, 1, 1]
    7.0
    """
    path = Path(path)
    with _read_errors(path), _open(path) as fh:
        header, offset, brk = _read_header(fh, path, max_points)
        if header.dataset_ids or header.n_values_per_point > 1:
            nval = header.n_values_per_point
            if not 0 <= dataset < nval:
                ids = header.dataset_ids or list(range(1, nval + 1))
                raise InputError(f"dataset index {dataset} out of range: the file holds {nval} "
                                 f"datasets (ids {ids}); choose 0 to {nval - 1}", path)
        elif dataset != 0:
            raise InputError(f"dataset index {dataset} requested but the file holds one dataset",
                             path)
        # the value block, read once (no copy of the whole file's bytes), and
        # never more of it than the grid can need (a decompression bomb stops here)
        fh.seek(offset)
        limit = _body_limit(header)
        body = fh.read(limit + 1)
        if len(body) > limit:
            raise ParseError(f"the values take more than {limit} bytes, far more than a "
                             f"{'x'.join(map(str, header.counts))} grid needs (a damaged or "
                             "hostile file)", path)
    expected = header.n_points * header.n_values_per_point
    first_line = header.header_lines + 1
    text = body
    if b"D" in body or b"d" in body:
        # Fortran double-precision exponents (1.0D-03), as in the header; errors
        # still quote the file's own text
        body = body.translate(_FORTRAN_EXPONENT)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            values = np.fromstring(body, dtype=np.float64, sep=" ")
        except ValueError:  # numpy >= 2.3 refuses unparsable text outright
            _locate_bad_value(text, first_line, path, brk)
            raise ParseError("unparsable text in the values", path) from None
    if values.size != expected:
        if values.size < expected:
            # either truncated or a token stopped the parser: find out which
            _locate_bad_value(text, first_line, path, brk)
            n_lines = text.count(brk) + (0 if text.endswith(brk) else 1)
            raise ParseError(f"truncated: expected {expected} values for a "
                             f"{'x'.join(map(str, header.counts))} grid, found {values.size}",
                             path, header.header_lines + n_lines)
        raise ParseError(f"too many values: expected {expected} for a "
                         f"{'x'.join(map(str, header.counts))} grid, found {values.size}", path)
    if not np.isfinite(values).all():
        _locate_bad_value(text, first_line, path, brk)
        raise ParseError("non-finite value in the density values", path)
    del body, text
    nval = header.n_values_per_point
    if nval > 1:
        values = np.ascontiguousarray(values.reshape(-1, nval)[:, dataset])
    values.setflags(write=False)  # ours alone: DensityGrid adopts it without a copy
    values = values.reshape(tuple(int(c) for c in header.counts))
    return DensityGrid(values, header.origin, header.axes, header.numbers, header.charges,
                       header.positions, source=os.fspath(path), comments=header.comments)


def _format_block(values: np.ndarray, fmt: str, per_line: int = 6) -> str:
    """Format a 1-D array as lines of `per_line` values."""
    n = values.size
    full, rest = divmod(n, per_line)
    out = []
    if full:
        line_fmt = (fmt * per_line) + "\n"
        out.append((line_fmt * full) % tuple(values[: full * per_line].tolist()))
    if rest:
        out.append(((fmt * rest) + "\n") % tuple(values[full * per_line:].tolist()))
    return "".join(out)


def write_cube(path, grid: DensityGrid, *, comments=None, digits: int = 5) -> None:
    """Write a grid as a cube file (bohr), atomically.

    Parameters
    ----------
    path : str or os.PathLike
        Destination; ``.gz``, ``.bz2`` or ``.xz`` compress.
    grid : DensityGrid
    comments : tuple of two str, optional
        Comment lines (default: the grid's own).
    digits : int
        Digits after the decimal point of each value (``%.{digits}E``).
        The customary 5 keeps 6 significant digits; use 16 for an exact
        round trip.

    Notes
    -----
    Values are written six per line with a line break after each run of the
    last axis, as quantum-chemistry codes do.
    """
    path = Path(path)
    c1, c2 = comments if comments is not None else (tuple(grid.comments) + ("", ""))[:2]
    lines = [c1.replace("\n", " "), c2.replace("\n", " ")]
    lines.append(f"{grid.n_atoms:5d} {grid.origin[0]:13.6f} {grid.origin[1]:13.6f} "
                 f"{grid.origin[2]:13.6f}")
    for n, ax in zip(grid.shape, grid.axes):
        lines.append(f"{n:5d} {ax[0]:13.8f} {ax[1]:13.8f} {ax[2]:13.8f}")
    for z, q, p in zip(grid.numbers, grid.charges, grid.positions):
        lines.append(f"{int(z):5d} {q:13.6f} {p[0]:13.8f} {p[1]:13.8f} {p[2]:13.8f}")
    header = "\n".join(lines) + "\n"
    width = digits + 8
    fmt = f" %{width}.{digits}E"
    nx, ny, nz = grid.shape
    rows = grid.values.reshape(nx * ny, nz)
    if nz % 6 == 0:
        body = _format_block(rows.ravel(), fmt)
    else:
        body = "".join(_format_block(row, fmt) for row in rows)
    text = header + body
    opener = _OPENERS.get(path.suffix.lower())
    with atomic_open(path, "wb") as fh:
        if opener is None:
            fh.write(text.encode("ascii"))
        else:
            with opener(fh, "wb") as zfh:
                zfh.write(text.encode("ascii"))
