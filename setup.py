"""Build of the compiled level search; everything else is declared in pyproject.toml."""

from setuptools import Extension, setup

setup(
    ext_modules=[
        Extension(
            "optimizer.native._levels",
            sources=["optimizer/native/levels.c"],
            extra_compile_args=["-O2"],
            optional=True,  # without a C compiler the pure-Python search runs instead
        )
    ]
)
