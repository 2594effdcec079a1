"""One place for the numba compilation options the kernels share.

``WITHOUT_RUNTIME`` compiles a function without numba's reference-counting
runtime (NRT). Such a function cannot allocate arrays (the compiler refuses),
so it can keep nothing beyond the call; in exchange the slices and records of
arrays it is given cost no atomic reference counts, which in a tight event
loop or allocation rule are most of the time (measured by
``python -m experiments.bench``). Only functions that allocate nothing use it:
the allocation rules (:mod:`allocation.registry`) and the peak simulation's
event loop (:mod:`peak._kernel`), whose working arrays are made by a caller
compiled with the runtime. The option is numba's ``_nrt`` flag, accepted by
every numba release this project supports (a test compiles with it).
"""
WITHOUT_RUNTIME = {"_nrt": False}
