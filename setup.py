"""Build of the compiled search and active-set solve; everything else is in pyproject.toml."""

from setuptools import Extension, setup

setup(
    ext_modules=[
        Extension(
            "basiswise.optimizer.solvers.native._levels",
            sources=["optimizer/solvers/native/levels.c", "optimizer/solvers/native/active_set.c"],
            extra_compile_args=["-O2"],
            optional=True,  # without a C compiler the pure-Python search runs instead
        )
    ]
)
