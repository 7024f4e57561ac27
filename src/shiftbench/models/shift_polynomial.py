"""The graph-filter layer: a polynomial of the shift operator with matrix taps."""

from __future__ import annotations

import math

import torch
from torch import nn
from torch.autograd.function import once_differentiable

from shiftbench.models.line_conv import causal_convolution
from shiftbench.models.shift_products import Delay, SparseShift, plan

# Samples are filtered a chunk at a time, so that a chunk's working set (a few
# ``(nodes, chunk * channels)`` matrices) stays in cache through all K products. Measured on a
# 2-core EPYC (1 MiB L2 a core, 32 MiB L3) on k-NN graphs: 1 MiB chunks were fastest at 1024
# nodes (2x ahead of the whole batch at once), and 4 samples a chunk at 16384 nodes.
CHUNK_BYTES = 1 << 20
MIN_CHUNK = 4


def chunk_size(batch: int, nodes: int, channels: int, element_bytes: int) -> int:
    """Samples a chunk: as many as keep one ``(nodes, chunk * channels)`` matrix near
    ``CHUNK_BYTES``, at least ``MIN_CHUNK``, at most the batch."""
    fitting = CHUNK_BYTES // max(1, nodes * channels * element_bytes)
    return max(1, min(batch, max(MIN_CHUNK, fitting)))


def taps_to_kernel(taps: torch.Tensor, weight: float | torch.Tensor = 1.0) -> torch.Tensor:
    """Taps ``(K + 1, in, out)`` of a filter on a delay ``S x = w x_{n-1}`` -> the equivalent
    causal convolution kernel ``(out, in, K + 1)``: ``W[:, :, K - k] = w^k H_k^T``."""
    powers = torch.as_tensor(weight, dtype=taps.dtype, device=taps.device) ** torch.arange(
        taps.shape[0], dtype=taps.dtype, device=taps.device
    )
    # (K + 1, in, out) -> (out, in, K + 1), then reversed along the kernel so tap k sits at K - k.
    return (taps * powers[:, None, None]).permute(2, 1, 0).flip(-1)


def kernel_to_taps(kernel: torch.Tensor) -> torch.Tensor:
    """A causal convolution kernel ``(out, in, K + 1)`` -> taps ``(K + 1, in, out)`` on the
    unit delay: ``H_k = W[:, :, K - k]^T`` (the inverse of :func:`taps_to_kernel` at ``w = 1``)."""
    return kernel.permute(2, 1, 0).flip(0)


class SparsePolynomial(torch.autograd.Function):
    """``Y = sum_{k=0..K} S^k X H_k + b`` by Horner's rule, chunk by chunk over the batch.

    Forward: ``Y_K = X H_K``, ``Y_k = S Y_{k+1} + X H_k``, each step one sparse product and one
    fused ``addmm`` of output width. Backward, with ``Z_0 = dY`` and ``Z_k = S^T Z_{k-1}`` (the
    stored transpose): ``dX = sum_k Z_k H_k^T``, ``dH_k = X^T Z_k``, ``db = sum dY``. Only ``X`` is
    kept for the backward pass; no per-tap buffer of the whole batch is ever built.

    Shapes: x ``(batch, nodes, in)``, taps ``(K + 1, in, out)``, bias ``(out,)`` or None ->
    ``(batch, nodes, out)``.
    """

    @staticmethod
    def forward(ctx, x, taps, bias, shift: SparseShift):  # type: ignore[override]
        batch, nodes, _ = x.shape
        order, out_channels = taps.shape[0] - 1, taps.shape[2]
        y = x.new_empty(batch, nodes, out_channels)
        step = chunk_size(batch, nodes, max(x.shape[2], out_channels), x.element_size())
        for start in range(0, batch, step):
            local = shift.gather(x[start : start + step])
            acc = local @ taps[order]
            for k in range(order - 1, -1, -1):
                acc = torch.addmm(shift.apply(acc), local, taps[k])
            shift.scatter(acc, y[start : start + step])
        if bias is not None:
            y += bias
        ctx.save_for_backward(x, taps)
        ctx.shift, ctx.has_bias, ctx.step = shift, bias is not None, step
        return y

    @staticmethod
    @once_differentiable
    def backward(ctx, grad):  # type: ignore[override]
        x, taps = ctx.saved_tensors
        shift: SparseShift = ctx.shift
        order, step = taps.shape[0] - 1, ctx.step
        want_x = ctx.needs_input_grad[0]
        grad_x = torch.empty_like(x, memory_format=torch.contiguous_format) if want_x else None
        grad_taps = torch.zeros_like(taps)
        for start in range(0, x.shape[0], step):
            local = shift.gather(x[start : start + step])
            z = shift.gather(grad[start : start + step])
            local_grad = z @ taps[0].T if want_x else None
            grad_taps[0].addmm_(local.T, z)
            for k in range(1, order + 1):
                z = shift.apply_transpose(z)
                grad_taps[k].addmm_(local.T, z)
                if want_x:
                    local_grad.addmm_(z, taps[k].T)
            if want_x:
                shift.scatter(local_grad, grad_x[start : start + step])
        grad_bias = grad.sum(dim=(0, 1)) if ctx.has_bias else None
        return grad_x, grad_taps, grad_bias, None


class ShiftPolynomialLayer(nn.Module):
    """``Y = sum_{k=0..K} S^k X H_k + b`` for a whole batch.

    The taps ``H_k`` are ``(in_channels, out_channels)`` matrices, one per power of ``S``. How
    ``S`` is applied is planned once from its structure (:mod:`shift_products`): a delay (the
    directed line graph or cycle) runs as the equivalent causal convolution with kernel
    ``W[:, :, K - k] = w^k H_k^T``; any other shift runs :class:`SparsePolynomial`. No graph is
    ever copied per sample.

    Args:
        shift: ``(nodes, nodes)`` sparse (CSR or COO) or dense shift operator ``S``.
        in_channels, out_channels: feature widths of ``X`` and ``Y``.
        order: ``K``, the highest power of ``S`` (``K + 1`` taps).
        bias: add a learned ``b`` of shape ``(out_channels,)``.
        structured: use a structured plan where ``S`` has one; False forces the generic
            sparse plan (to check the structured ones against it).

    Shapes:
        input ``(batch, nodes, in_channels)`` -> output ``(batch, nodes, out_channels)``.
    """

    def __init__(
        self,
        shift: torch.Tensor,
        in_channels: int,
        out_channels: int,
        order: int,
        bias: bool = True,
        structured: bool = True,
    ) -> None:
        super().__init__()
        if not isinstance(order, int) or order < 0:
            raise ValueError(f"order={order!r} is not accepted; accepted: an integer >= 0")
        self.in_channels = in_channels
        self.out_channels = out_channels
        self.order = order
        # The graph is data, not a learned weight: keep it out of the state dict.
        self.register_buffer("shift", shift, persistent=False)
        self.structured = structured
        self.plan = plan(shift, structured)
        self.taps = nn.Parameter(torch.empty(order + 1, in_channels, out_channels))
        self.bias = nn.Parameter(torch.empty(out_channels)) if bias else None
        self.reset_parameters()

    def reset_parameters(self) -> None:
        """Uniform in ``+-1/sqrt(fan_in)`` with ``fan_in = in_channels * (K + 1)``, as torch's
        Conv1d initialises a kernel of size ``K + 1``."""
        bound = 1.0 / math.sqrt(self.in_channels * (self.order + 1))
        nn.init.uniform_(self.taps, -bound, bound)
        if self.bias is not None:
            nn.init.uniform_(self.bias, -bound, bound)

    def forward(self, x: torch.Tensor) -> torch.Tensor:
        if isinstance(self.plan, Delay):
            return causal_convolution(x, taps_to_kernel(self.taps, self.plan.weight), self.bias, self.plan.boundary)
        return SparsePolynomial.apply(x, self.taps, self.bias, self.plan)

    def extra_repr(self) -> str:
        plan_name = f"delay ({self.plan.boundary} boundary)" if isinstance(self.plan, Delay) else "sparse"
        return (
            f"{self.in_channels}, {self.out_channels}, order={self.order}, nodes={self.shift.shape[0]}, "
            f"plan={plan_name}, bias={self.bias is not None}"
        )
