"""A cache prefetch hint callable from numba kernels.

The sweeps visit voxels in value order, which is random in space, so their run time is
dominated by cache misses on the union-find array. The sweep order is known in advance,
so a kernel can ask the CPU to fetch the neighbourhood of a voxel a few steps ahead. The
hint (LLVM's ``llvm.prefetch``) never faults and never changes results.
"""

from __future__ import annotations

from llvmlite import ir
from numba import types
from numba.core import cgutils
from numba.extending import intrinsic

__all__ = ["prefetch"]


@intrinsic
def prefetch(typingctx, array, index):
    """Hint that ``array[index]`` will be read and written soon (``index`` must be valid)."""
    sig = types.void(array, index)

    def codegen(context, builder, signature, args):
        aryty, _ = signature.args
        ary = context.make_array(aryty)(context, builder, args[0])
        ptr = cgutils.get_item_pointer(context, builder, aryty, ary, [args[1]],
                                       wraparound=False)
        i8p = ir.IntType(8).as_pointer()
        i32 = ir.IntType(32)
        fnty = ir.FunctionType(ir.VoidType(), [i8p, i32, i32, i32])
        fn = cgutils.get_or_insert_function(builder.module, fnty, "llvm.prefetch.p0")
        # rw = 1 (write), locality = 3 (keep in all cache levels), cache type = 1 (data)
        builder.call(fn, [builder.bitcast(ptr, i8p), ir.Constant(i32, 1), ir.Constant(i32, 3),
                          ir.Constant(i32, 1)])
        return context.get_dummy_value()

    return sig, codegen
