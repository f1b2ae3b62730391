"""The forward model: parameters in, modelled gas ratios out (magma
degassing followed by modification on the way up).

May import: common, chemistry, magma, ascent.
"""
