"""Finds or generates the protoc Python classes of proto/veer/v1.

Places, in order:
  1. veer/v1/ in this package (a pip install generates them there);
  2. <folder of the loaded libveer>/python/veer/v1 (the CMake target
     veer_python_proto writes them into the build tree);
  3. generated now with `protoc --python_out` from the schema in the source
     tree into a cache folder (VEER_PB_CACHE, else ~/.cache/veer/pb/<hash>),
     when protoc is on PATH.
"""

import hashlib
import importlib
import os
import pathlib
import shutil
import subprocess
import tempfile

from . import _lib
from . import v1 as _v1

PROTO_NAMES = ("drive", "limits", "route", "plan", "setpoints", "link", "range")
# The message schema version this package was written for; must equal the
# library's veer_wire_schema_version() (proto/veer/v1/plan.proto says 1).
SCHEMA_VERSION = 1


class SchemaNotFound(ImportError):
    pass


def _has_all(folder):
    folder = pathlib.Path(folder)
    return all((folder / ("%s_pb2.py" % n)).is_file() for n in PROTO_NAMES)


def _proto_dir():
    d = os.environ.get("VEER_PROTO_DIR")
    if d:
        return pathlib.Path(d)
    return _lib.REPO_ROOT / "proto" if _lib.REPO_ROOT is not None else None


def _generate():
    proto = _proto_dir()
    if proto is None:
        return None
    files = [proto / "veer" / "v1" / ("%s.proto" % n) for n in PROTO_NAMES]
    if not all(f.is_file() for f in files):
        return None
    protoc = shutil.which("protoc")
    if not protoc:
        return None
    h = hashlib.sha256()
    for f in files:
        h.update(f.read_bytes())
    base = os.environ.get("VEER_PB_CACHE")
    if base:
        root = pathlib.Path(base)
    else:
        root = pathlib.Path(os.environ.get("XDG_CACHE_HOME", pathlib.Path.home() / ".cache")) / "veer" / "pb"
    out = root / h.hexdigest()[:16]
    target = out / "veer" / "v1"
    if _has_all(target):
        return target
    try:
        out.mkdir(parents=True, exist_ok=True)
        tmp = pathlib.Path(tempfile.mkdtemp(dir=out))
    except OSError:
        tmp = pathlib.Path(tempfile.mkdtemp())
        out = tmp
    rel = ["veer/v1/%s.proto" % n for n in PROTO_NAMES]
    r = subprocess.run([protoc, "-I", str(proto), "--python_out=%s" % tmp] + rel, capture_output=True, text=True)
    if r.returncode != 0:
        raise SchemaNotFound("protoc failed on %s: %s" % (proto, r.stderr.strip()))
    gen = tmp / "veer" / "v1"
    if out is tmp:
        return gen
    target.parent.mkdir(parents=True, exist_ok=True)
    try:
        os.replace(gen, target)  # atomic: a concurrent first use sees all or nothing
    except OSError:
        if not _has_all(target):
            return gen
    shutil.rmtree(tmp, ignore_errors=True)
    return target


_modules = None


def modules():
    """The generated modules as a dict name -> module (drive, limits, route, plan, setpoints)."""
    global _modules
    if _modules is not None:
        return _modules
    here = pathlib.Path(_v1.__file__).parent
    where = None
    if _has_all(here):
        where = here
    else:
        try:
            lib = _lib.load()
            cand = pathlib.Path(lib.path).resolve().parent / "python" / "veer" / "v1"
            if _has_all(cand):
                where = cand
        except _lib.LibraryNotFound:
            pass
    if where is None:
        where = _generate()
    if where is None:
        raise SchemaNotFound("the Python classes of proto/veer/v1 were not found (looked in %s and beside libveer) "
                             "and protoc or the schema is missing to generate them; build the CMake target "
                             "veer_python_proto or install protobuf-compiler" % here)
    if str(where) not in _v1.__path__ and where != here:
        _v1.__path__.insert(0, str(where))
    _modules = {n: importlib.import_module("veer.v1.%s_pb2" % n) for n in PROTO_NAMES}
    return _modules


def message(name):
    """A message class by name, e.g. message('PlanRequest')."""
    for mod in modules().values():
        cls = getattr(mod, name, None)
        if cls is not None:
            return cls
    raise KeyError(name)
