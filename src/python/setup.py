"""Packs the extension built by CMake (build/python/latentlift/_core*.so) with the Python files.

The build folder is LATENTLIFT_BUILD_DIR, or ../../build beside this folder (scripts/setup.sh
builds it first). Nothing is compiled here, so pip needs no compiler or network.
"""

import glob
import os
import shutil

from setuptools import Extension, setup
from setuptools.command.build_ext import build_ext

HERE = os.path.dirname(os.path.abspath(__file__))


class CopyBuiltExtension(build_ext):
    def build_extension(self, ext):
        build = os.environ.get("LATENTLIFT_BUILD_DIR", os.path.join(HERE, "..", "..", "build"))
        built = glob.glob(os.path.join(build, "python", "latentlift", "_core*.so"))
        if not built:
            raise RuntimeError(f"latentlift._core not found in {build}/python/latentlift: run scripts/setup.sh "
                               "(or cmake --build build --target latentlift_python) first")
        target = self.get_ext_fullpath(ext.name)
        os.makedirs(os.path.dirname(target), exist_ok=True)
        shutil.copyfile(built[0], target)


setup(ext_modules=[Extension("latentlift._core", sources=[])], cmdclass={"build_ext": CopyBuiltExtension})
