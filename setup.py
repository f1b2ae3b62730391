"""Build configuration that pyproject.toml cannot express: the prior files in the
top-level priors/ folder ship as the data package ``ventsource.shipped_priors``
(read with importlib.resources), so the repository keeps one copy of each file and
the wheel carries the same files. Works for wheels and editable installs."""
from setuptools import find_packages, setup

setup(
    packages=find_packages("src") + ["ventsource.shipped_priors"],
    package_dir={"": "src", "ventsource.shipped_priors": "priors"},
    package_data={"ventsource": ["data/*"], "ventsource.shipped_priors": ["*.toml"]},
    include_package_data=False,
)
