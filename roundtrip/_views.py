"""Borrowed array views for the hot calls of the compiled kernels.

A numba array carries a pointer to its reference-counted owner, and every slice
of it and every call that passes it to compiled code that is not inlined (an
allocation rule's ``cfunc``, say) raises and lowers that count with atomic
instructions. At the rule call of the group kernel that is about an eighth of
the time of a whole round (measured by ``python -m experiments.bench``).

``borrowed(a)`` is a view of the same memory with no owner (``numba.carray``
over a's data pointer), so that slices of it and calls with it do no reference
counting. It is safe only while ``a`` is alive, so the kernels borrow only from
their own arguments, which the caller holds for the whole call, and never return
or store a borrowed view. (Borrowing from an array allocated in the same
function is not safe: numba may free it after its last use by name, while the
view is still in use.) Only C-contiguous arrays are accepted (a typing error
otherwise). With ``NUMBA_DISABLE_JIT=1`` it returns ``a`` itself.
"""
from __future__ import annotations

import numba
from numba import carray, njit, types
from numba.core.errors import TypingError
from numba.extending import intrinsic


@intrinsic
def _data_pointer(typingctx, arr):
    """Pointer to the first element of a C-contiguous array."""
    if not isinstance(arr, types.Array) or arr.layout != "C":
        raise TypingError(f"borrowed() needs a C-contiguous array, not {arr}")
    sig = types.CPointer(arr.dtype)(arr)

    def codegen(context, builder, signature, args):
        return context.make_array(signature.args[0])(context, builder, args[0]).data
    return sig, codegen


if numba.config.DISABLE_JIT:
    def borrowed(a):
        return a
else:
    @njit(cache=True, inline="always")
    def borrowed(a):
        """A view of ``a`` that is not reference counted (see the module notes)."""
        return carray(_data_pointer(a), a.shape)
