from setuptools import setup; setup(cffi_modules=["c_ref/build_ffi.py:ffibuilder", "c_ref/host/build_loop.py:ffibuilder"])
