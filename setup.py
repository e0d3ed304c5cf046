"""Builds the extension alphaledger._native with the project's CMake (the pybind11 module of
python/CMakeLists.txt) and puts it into the package; pyproject.toml holds everything else.
No download happens: CMake finds Debian's packages (scripts/install-deps.sh)."""

import glob
import os
import shutil
import subprocess
import sys

from setuptools import Extension, setup
from setuptools.command.build_ext import build_ext

ROOT = os.path.dirname(os.path.abspath(__file__))


class CMakeBuild(build_ext):
    def build_extension(self, ext):
        target = self.get_ext_fullpath(ext.name)
        os.makedirs(os.path.dirname(target), exist_ok=True)
        prebuilt = os.environ.get("ALPHALEDGER_PREBUILT_MODULE")
        if prebuilt:  # the module already built by CMake (build/python/alphaledger/_native*.so)
            shutil.copyfile(prebuilt, target)
            return
        build_dir = os.path.abspath(os.path.join(self.build_temp, "cmake"))
        os.makedirs(build_dir, exist_ok=True)
        configure = ["cmake", "-S", ROOT, "-B", build_dir, "-DCMAKE_BUILD_TYPE=Release",
                     "-DALPHALEDGER_TESTS=OFF", "-DALPHALEDGER_PYTHON=ON",
                     f"-DPython_EXECUTABLE={sys.executable}", f"-DPython3_EXECUTABLE={sys.executable}",
                     f"-DPYTHON_EXECUTABLE={sys.executable}"]
        if shutil.which("ccache"):
            configure += ["-DCMAKE_CXX_COMPILER_LAUNCHER=ccache"]
        if shutil.which("ninja"):
            configure += ["-G", "Ninja"]
        subprocess.run(configure, check=True)
        jobs = os.environ.get("ALPHALEDGER_BUILD_JOBS", "2")
        subprocess.run(["cmake", "--build", build_dir, "--target", "alphaledger_python", "-j", jobs], check=True)
        built = glob.glob(os.path.join(build_dir, "python", "alphaledger", "_native*.so"))
        if len(built) != 1:
            raise RuntimeError(f"expected one built _native module in {build_dir}, found {built}")
        shutil.copyfile(built[0], target)


setup(ext_modules=[Extension("alphaledger._native", sources=[])], cmdclass={"build_ext": CMakeBuild})
