"""Small helpers the generated modules import at load time."""
from __future__ import annotations

import importlib
import sys

from numba import types
from numba.extending import intrinsic


def resolve_class(module: str, qualname: str):
    """The component class ``module.qualname``, from ``sys.modules`` first (scripts, test files)."""
    mod = sys.modules.get(module) or importlib.import_module(module)
    obj = mod
    for part in qualname.split("."):
        obj = getattr(obj, part)
    return obj


@intrinsic
def view(typingctx, arr, start, stop):
    """``arr[start:stop]`` of a contiguous 1-D array, built without clamping or reference counting.

    Generated code hands every component its share of the flat arrays as such
    views. Their bounds come from the layout, which sized the arrays, so the
    clamping of an ordinary slice is dead work; and a plain slice would count
    a reference to ``arr``'s memory (the components run ~10 slices per call,
    more than the arithmetic of a small component). The view lives only for
    the call it is passed to; ``arr`` outlives it.
    """
    if not (isinstance(arr, types.Array) and arr.ndim == 1 and arr.layout == "C"):
        return None
    result = types.Array(arr.dtype, 1, "C")
    sig = result(arr, types.intp, types.intp)

    def codegen(context, builder, sig, args):
        src = context.make_array(sig.args[0])(context, builder, args[0])
        out = context.make_array(sig.return_type)(context, builder)
        itemsize = context.get_constant(types.intp, context.get_abi_sizeof(context.get_data_type(arr.dtype)))
        context.populate_array(out, data=builder.gep(src.data, [args[1]]), shape=[builder.sub(args[2], args[1])],
                               strides=[itemsize], itemsize=itemsize, meminfo=None, parent=None)
        return out._getvalue()

    return sig, codegen


@intrinsic
def view2(typingctx, arr, start, rows, cols):
    """``arr[start:start + rows * cols]`` as a C-ordered ``rows x cols`` matrix, like :func:`view`.

    The generated Jacobian hands each component's ``jacobian`` kernel its two
    partial-derivative matrices as such views of the work array, so evaluating
    the Jacobian allocates nothing (it runs every few steps: after each new
    duty, the explicit method refreshes its algebraic block).
    """
    if not (isinstance(arr, types.Array) and arr.ndim == 1 and arr.layout == "C"):
        return None
    result = types.Array(arr.dtype, 2, "C")
    sig = result(arr, types.intp, types.intp, types.intp)

    def codegen(context, builder, sig, args):
        src = context.make_array(sig.args[0])(context, builder, args[0])
        out = context.make_array(sig.return_type)(context, builder)
        itemsize = context.get_constant(types.intp, context.get_abi_sizeof(context.get_data_type(arr.dtype)))
        context.populate_array(out, data=builder.gep(src.data, [args[1]]), shape=[args[2], args[3]],
                               strides=[builder.mul(args[3], itemsize), itemsize], itemsize=itemsize,
                               meminfo=None, parent=None)
        return out._getvalue()

    return sig, codegen
