"""Build step of the veer Python package (configuration in pyproject.toml).

build_py also
  * generates veer/v1/*_pb2.py with `protoc --python_out` from the schema
    (VEER_PROTO_DIR, else ../../proto beside this file), unless the source
    tree already has them;
  * copies libveer.so into the package from VEER_LIBRARY, else from the
    build folders build/ci and build of the source tree, when one exists
    (without it the installed package finds the library through
    VEER_LIBRARY or the system's search path at run time)."""

import os
import pathlib
import shutil
import subprocess

from setuptools import setup
from setuptools.command.build_py import build_py

HERE = pathlib.Path(__file__).resolve().parent
NAMES = ("drive", "limits", "route", "plan", "setpoints", "link", "range")


class build_py_with_schema(build_py):
    def run(self):
        super().run()
        out = pathlib.Path(self.build_lib)
        self._schema(out)
        self._library(out / "veer")

    def _schema(self, out):
        target = out / "veer" / "v1"
        if all((target / ("%s_pb2.py" % n)).is_file() for n in NAMES):
            return
        proto = pathlib.Path(os.environ.get("VEER_PROTO_DIR", HERE.parents[1] / "proto"))
        files = ["veer/v1/%s.proto" % n for n in NAMES]
        if not all((proto / f).is_file() for f in files):
            raise SystemExit("veer: the message schema proto/veer/v1 was not found at %s; set VEER_PROTO_DIR" % proto)
        protoc = shutil.which("protoc")
        if not protoc:
            raise SystemExit("veer: protoc is needed to generate the message classes (Debian: protobuf-compiler)")
        target.mkdir(parents=True, exist_ok=True)
        subprocess.check_call([protoc, "-I", str(proto), "--python_out=%s" % out] + files)

    def _library(self, pkg):
        cands = []
        if os.environ.get("VEER_LIBRARY"):
            cands.append(pathlib.Path(os.environ["VEER_LIBRARY"]))
        for sub in ("build/ci", "build"):
            cands.append(HERE.parents[1] / sub / "libveer.so")
        for c in cands:
            if c.is_file():
                shutil.copyfile(c.resolve(), pkg / "libveer.so")
                return


setup(cmdclass={"build_py": build_py_with_schema})
