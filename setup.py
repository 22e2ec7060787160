"""Build step for the one optional compiled kernel (everything else is in pyproject.toml).

``masterqc.measure._cascade`` (biquad cascades, masterqc/measure/iir.py) is optional: when it
cannot be compiled (no C compiler, no Python headers) the install goes on without it and
masterqc uses its other kernels, which give the same bits.
"""

from setuptools import Extension, setup

setup(ext_modules=[Extension("masterqc.measure._cascade", ["masterqc/measure/_cascade.c"], optional=True,
                             # no fused multiply-add: the recursion must round as the reference does
                             extra_compile_args=["-O2", "-ffp-contract=off"])])
