"""Finding a CHIANTI database and preparing the fiasco HDF5 file the table builder reads.

Search order (first hit wins):

1. an explicit ``chianti`` path argument (an ASCII CHIANTI tree, or a ``.tar.xz`` of one);
2. the ``SYNTHCORONA_CHIANTI`` environment variable (same two forms);
3. fiasco's own configured ASCII database (``fiasco.defaults['ascii_dbase_root']``).

A ``.tar.xz`` is extracted once into the user cache directory and reused. The
HDF5 file fiasco needs is built in the cache directory for only the ions the
build needs, keyed by a hash of the tree and the file list, and reused.
Only this module and :mod:`synthcorona.atomic.builder` ever import fiasco, and
only inside functions.
"""
from __future__ import annotations

import hashlib
import pathlib
import tarfile
from dataclasses import dataclass

from ..errors import ChiantiNotFoundError, DependencyError
from ..settings import CHIANTI_ENV as ENV_VAR
from ..settings import chianti_path

__all__ = ["ChiantiSource", "cache_dir", "find_chianti", "ensure_hdf5"]

#: CHIANTI versions whose file formats fiasco 0.8 reads (fiasco's own list, checked at run time).
MIN_VERSION = (8, 0)



@dataclass(frozen=True)
class ChiantiSource:
    """A located ASCII CHIANTI tree.

    Attributes
    ----------
    root : pathlib.Path
        Top of the ASCII tree (holds ``VERSION``).
    version : str
        Content of the ``VERSION`` file.
    origin : str
        How it was found ("argument", "environment variable SYNTHCORONA_CHIANTI", "fiasco configuration").
    provenance_note : str
        Text of a ``PROVENANCE.md`` beside the tarball / tree (summary line), if any.
    """

    root: pathlib.Path
    version: str
    origin: str
    provenance_note: str = ""


def cache_dir() -> pathlib.Path:
    """User cache directory of synthcorona (platformdirs; honours ``XDG_CACHE_HOME``)."""
    import platformdirs

    d = pathlib.Path(platformdirs.user_cache_dir("synthcorona", appauthor=False))
    d.mkdir(parents=True, exist_ok=True)
    return d


def _version_tuple(text: str) -> tuple[int, ...]:
    parts = []
    for p in text.strip().split("."):
        try:
            parts.append(int(p))
        except ValueError:
            break
    return tuple(parts)


def _provenance_summary(path: pathlib.Path) -> str:
    """First substantive paragraph of a PROVENANCE.md next to ``path`` (empty if none)."""
    for cand in (path.parent / "PROVENANCE.md", path / "PROVENANCE.md"):
        if cand.is_file():
            text = cand.read_text(errors="replace")
            paras = [p.strip() for p in text.split("\n\n") if p.strip() and not p.lstrip().startswith("#")]
            return paras[0] if paras else ""
    return ""


def _extract_tarball(tarball: pathlib.Path) -> pathlib.Path:
    """Extract a ``.tar.xz`` CHIANTI copy into the cache (once) and return its tree root."""
    h = hashlib.sha256()
    st = tarball.stat()
    h.update(f"{tarball.resolve()}:{st.st_size}:{st.st_mtime_ns}".encode())
    dest = cache_dir() / "chianti" / h.hexdigest()[:16]
    done = dest / ".extracted"
    if not done.exists():
        dest.mkdir(parents=True, exist_ok=True)
        try:
            with tarfile.open(tarball, "r:xz") as tf:
                tf.extractall(dest, filter="data")
        except (tarfile.TarError, OSError, EOFError) as exc:
            raise ChiantiNotFoundError(f"could not extract CHIANTI tarball {tarball}: {exc}") from exc
        done.touch()
    roots = [p.parent for p in dest.rglob("VERSION") if (p.parent / "ioneq").is_dir()]
    if not roots:
        raise ChiantiNotFoundError(f"CHIANTI tarball {tarball} holds no tree with a VERSION file and ioneq/")
    return sorted(roots, key=lambda p: len(p.parts))[0]


def _check_tree(root: pathlib.Path, origin: str, tried: list[str]) -> ChiantiSource | None:
    if root.is_file() and root.name.endswith((".tar.xz", ".txz")):
        note = _provenance_summary(root)
        tree = _extract_tarball(root)
        src = _check_tree(tree, origin, tried)
        if src is not None:
            return ChiantiSource(src.root, src.version, origin + f" (extracted from {root})", note or src.provenance_note)
        return None
    vfile = root / "VERSION"
    if not vfile.is_file():
        tried.append(f"{origin}: {root} (no VERSION file)")
        return None
    version = vfile.read_text().strip().splitlines()[0].strip()
    if _version_tuple(version) < MIN_VERSION:
        raise ChiantiNotFoundError(
            f"CHIANTI at {root} ({origin}) is version {version}; fiasco needs version 8.0 or newer. "
            f"Point synthcorona at a newer copy with --chianti PATH or {ENV_VAR}."
        )
    return ChiantiSource(root, version, origin, _provenance_summary(root))


def substituted_ions(source: ChiantiSource) -> dict:
    """Ions whose level-resolved files come from another release than the tree's VERSION.

    Read from a ``COMPOSITE_MANIFEST.tsv`` (path, source tag, ...) at the top of the tree, as
    shipped with composite CHIANTI copies; an ordinary release has none and gives ``{}``.
    Returns {ion name (e.g. "fe_12"): source tag (e.g. "v7.0.0")}.
    """
    man = source.root / "COMPOSITE_MANIFEST.tsv"
    if not man.is_file():
        return {}
    own = "v" + source.version
    out = {}
    for line in man.read_text(errors="replace").splitlines():
        if not line or line.startswith("#"):
            continue
        parts = line.split("\t")
        if len(parts) < 2:
            continue
        path, tag = parts[0], parts[1]
        bits = path.split("/")
        if len(bits) == 3 and tag != own and bits[1].startswith(bits[0] + "_"):
            out.setdefault(bits[1], tag)
    return out


#: What the table builder needs (fiasco 0.8.2 supports Python >= 3.12 only).
FIASCO_REQUIREMENT = "fiasco 0.8.2, which needs Python >= 3.12"


def fiasco_available() -> bool:
    """True if fiasco can be imported here (checked without importing it: its import makes a network call)."""
    import importlib.util

    return importlib.util.find_spec("fiasco") is not None


def require_fiasco(what: str = "the table builder") -> None:
    """Raise :class:`~synthcorona.errors.DependencyError` naming ``what`` if fiasco is not installed."""
    if not fiasco_available():
        import sys

        v = ".".join(map(str, sys.version_info[:2]))
        raise DependencyError(
            f"{what} needs {FIASCO_REQUIREMENT}; this is Python {v} without fiasco. Use a Python 3.12 environment "
            "(e.g. 'python3.12 -m venv .venv312 && .venv312/bin/pip install .'); everything else in synthcorona "
            "works without it, on the embedded table.", package="fiasco", requirement=FIASCO_REQUIREMENT)


def find_chianti(path=None) -> ChiantiSource:
    """Locate an ASCII CHIANTI database (argument > ``SYNTHCORONA_CHIANTI`` > fiasco's configuration).

    Parameters
    ----------
    path : str or pathlib.Path, optional
        An ASCII CHIANTI tree or a ``.tar.xz`` of one.

    Raises
    ------
    ChiantiNotFoundError
        Nothing usable was found; the message lists every place tried.
    """
    tried: list[str] = []
    if path is not None:
        p = pathlib.Path(path).expanduser()
        if not p.exists():
            raise ChiantiNotFoundError(f"chianti={p}: no such file or directory")
        src = _check_tree(p, "argument", tried)
        if src:
            return src
    p = chianti_path()
    if p is not None:
        if p.exists():
            src = _check_tree(p, f"environment variable {ENV_VAR}", tried)
            if src:
                return src
        else:
            tried.append(f"environment variable {ENV_VAR}: {p} (does not exist)")
    else:
        tried.append(f"environment variable {ENV_VAR}: not set")
    try:
        import fiasco  # lazy: only the builder path gets here

        root = fiasco.defaults.get("ascii_dbase_root")
        if root:
            p = pathlib.Path(root)
            if p.exists():
                src = _check_tree(p, "fiasco configuration", tried)
                if src:
                    return src
            else:
                tried.append(f"fiasco configuration: {p} (does not exist)")
    except ImportError:
        tried.append("fiasco configuration: fiasco is not installed")
    raise ChiantiNotFoundError(
        "no CHIANTI database found. Looked in: " + "; ".join(tried)
        + f". Give the path of an ASCII CHIANTI tree (or a .tar.xz of one) with --chianti PATH, "
        f"or set {ENV_VAR}=PATH."
    )


def ensure_hdf5(source: ChiantiSource, elements: list[str], progress: bool = False) -> pathlib.Path:
    """Build (once) and return a fiasco HDF5 database holding only the files for ``elements``.

    The file is cached in :func:`cache_dir` under a name derived from the tree, its
    version and the element list, and reused by later builds.
    """
    import fiasco.util
    from fiasco.util.util import get_chianti_catalog

    catalog = get_chianti_catalog(source.root)
    prefixes = tuple(f"{el.lower()}_" for el in elements)
    files = []
    for key, names in catalog.items():
        if key == "ion_files":
            files += [n for n in names if n.startswith(prefixes) and n.split(".")[0].split("_")[0] in
                      {e.lower() for e in elements}]
        else:
            files += list(names)
    h = hashlib.sha256()
    h.update(str(source.root.resolve()).encode())
    h.update(source.version.encode())
    h.update("\n".join(sorted(files)).encode())
    h.update(fiasco.__version__.encode())
    out = cache_dir() / "fiasco-db" / f"chianti-{source.version}-{h.hexdigest()[:16]}.h5"
    if out.exists():
        return out
    out.parent.mkdir(parents=True, exist_ok=True)
    tmp = out.with_suffix(".h5.partial")
    if tmp.exists():
        tmp.unlink()
    fiasco.util.build_hdf5_dbase(source.root, tmp, files=files, show_progress=progress)
    tmp.rename(out)
    return out
