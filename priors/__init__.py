"""Shipped prior files. Installed, this folder is the data package
``ventsource.shipped_priors`` (see setup.py); read the files with
``ventsource.inference.priors.shipped``, not by importing this module."""
