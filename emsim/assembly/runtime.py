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


def _borrowed(context, builder, sig, args, shape_of):
    """Codegen of a C-ordered view of ``args[0]`` from element ``args[1]`` on: no meminfo, no parent.

    ``shape_of(builder, args)`` gives the view's shape; the strides follow from it (C order).
    """
    src = context.make_array(sig.args[0])(context, builder, args[0])
    out = context.make_array(sig.return_type)(context, builder)
    itemsize = context.get_constant(types.intp, context.get_abi_sizeof(context.get_data_type(sig.args[0].dtype)))
    shape = shape_of(builder, args)
    strides = [itemsize]
    for extent in reversed(shape[1:]):
        strides.insert(0, builder.mul(extent, strides[0]))
    context.populate_array(out, data=builder.gep(src.data, [args[1]]), shape=shape, strides=strides,
                           itemsize=itemsize, meminfo=None, parent=None)
    return out._getvalue()


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
    sig = types.Array(arr.dtype, 1, "C")(arr, types.intp, types.intp)

    def codegen(context, builder, sig, args):
        return _borrowed(context, builder, sig, args, lambda b, a: [b.sub(a[2], a[1])])

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
    sig = types.Array(arr.dtype, 2, "C")(arr, types.intp, types.intp, types.intp)

    def codegen(context, builder, sig, args):
        return _borrowed(context, builder, sig, args, lambda b, a: [a[2], a[3]])

    return sig, codegen
