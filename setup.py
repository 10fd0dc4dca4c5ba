"""Package layout (everything else is in pyproject.toml).

The repository keeps its three source folders at the top level; they install as one import package:
``api/`` -> ``lowgmap`` (the public surface), ``physics/`` -> ``lowgmap.physics``, ``app/`` -> ``lowgmap.app``,
and the bundled sample cases ``sample_cases/`` -> ``lowgmap.samples`` (data only). Sub-packages are found
automatically, so a new folder with an ``__init__.py`` needs no edit here.
"""
from setuptools import find_packages, setup

ROOTS = {"lowgmap": "api", "lowgmap.physics": "physics", "lowgmap.app": "app", "lowgmap.samples": "sample_cases"}

packages = []
for package, folder in ROOTS.items():
    packages.append(package)
    packages += [f"{package}.{sub}" for sub in find_packages(folder)]

setup(packages=packages, package_dir=ROOTS)
