"""Build hook: the demo styles and the invented demo region ship inside the package.

``styles/`` and ``demo_region/`` stay where a checkout has them; a built distribution carries
them as ``compose/demo/styles`` and ``compose/demo/demo_region`` (package data), so
``compose demo`` works after a plain ``pip install`` too (see :mod:`compose.demo`). Everything
else about the build is in pyproject.toml.
"""
from setuptools import find_packages, setup

setup(
    packages=find_packages(include=["compose", "compose.*"])
    + ["compose.demo.styles", "compose.demo.demo_region"],
    package_dir={"compose.demo.styles": "styles", "compose.demo.demo_region": "demo_region"},
    package_data={"compose.ramps": ["*.toml"], "compose.demo.styles": ["*.toml"],
                  "compose.demo.demo_region": ["*.tif", "*.gpkg", "README.md"]},
)
