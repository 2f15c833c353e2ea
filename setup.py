"""Build hook: the demo styles and the invented demo region ship inside the package.

``styles/`` and ``demo_region/`` stay where a checkout has them; a built distribution carries
them as ``compose/demo/styles`` and ``compose/demo/demo_region`` (package data), so
``compose demo`` works after a plain ``pip install`` too (see :mod:`compose.demo`). The window
statistics' loops are a small C extension, ``compose._kernels`` (Python's buffer protocol only,
no numpy headers); it is optional: where it cannot be built compose runs the same numbers in
numpy (:mod:`compose.kernels`). Everything else about the build is in pyproject.toml.
"""
from setuptools import Extension, find_packages, setup

setup(
    packages=find_packages(include=["compose", "compose.*"])
    + ["compose.demo.styles", "compose.demo.demo_region"],
    package_dir={"compose.demo.styles": "styles", "compose.demo.demo_region": "demo_region"},
    package_data={"compose.ramps": ["*.toml"], "compose.demo.styles": ["*.toml"],
                  "compose.demo.demo_region": ["*.tif", "*.gpkg", "README.md"]},
    # -ffp-contract=off: no fused multiply-add, so float32/float64 results equal numpy's bit for bit
    ext_modules=[Extension("compose._kernels", ["compose/_kernels.c"], optional=True,
                           extra_compile_args=["-O3", "-ffp-contract=off", "-fno-trapping-math",
                                               "-fno-math-errno"])],
)
