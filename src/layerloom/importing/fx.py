"""Reading a PyTorch ``nn.Module`` with ``torch.fx``: trace, propagate shapes, map to our kinds.

The module is traced with ``torch.fx.symbolic_trace`` and run once on the meta device (its
parameters swapped for meta tensors with ``torch.func.functional_call``, so nothing is computed
and the module is left untouched) on an input of batch 1; an operation without a meta kernel
makes the run fall back to zeros on the CPU. Every call is run under ``FlopCounterMode``: its
FLOPs / 2 are the MACs an unmapped operation carries. Settings of mapped blocks come from the
module's attributes (or the function's arguments), and each mapping is confirmed against the
traced shape and the module's parameter count (:func:`layerloom.importing.mapping.confirm`).
"""
from __future__ import annotations

import operator
import re

from layerloom.core.shapes import Shape
from layerloom.importing.build import Imported, build_design
from layerloom.importing.mapping import confirm, conv_chain, representable, upsample_chain
from layerloom.importing.plan import ImportFailed, SourceOp, one_line, plan


DEFAULT_INPUT = Shape.chw(3, 224, 224)


def import_module(module, input_shape: Shape = DEFAULT_INPUT, name: str | None = None,
                  motifs: bool = True) -> Imported:
    """A design read from ``module`` (an ``nn.Module``) for inputs of ``input_shape`` (C×H×W).

    Raises :class:`ImportFailed` with a one-line reason when the module does not trace or run.
    """
    import torch

    _load_tables()
    cls = type(module).__name__
    try:
        gm = torch.fx.symbolic_trace(module, concrete_args=_defaults(module))
    except Exception as e:  # noqa: BLE001 — any tracing failure is the user's module's, reported in one line
        raise ImportFailed(f"{cls} does not trace with torch.fx ({type(e).__name__}: {one_line(e)}); "
                           "import needs a forward without data-dependent control flow") from None
    placeholders = [n for n in gm.graph.nodes if n.op == "placeholder" and not n.args]  # args: a default
    if len(placeholders) != 1:
        raise ImportFailed(f"{cls}.forward takes {len(placeholders)} inputs; import reads networks with one image input")
    likely = {n.name for n in gm.graph.nodes if not _maybe_mapped(gm, n)}
    results, flops = _propagate(gm, input_shape, cls, likely)
    reader = _Reader(gm, results, flops)
    x = placeholders[0].name
    ops, shapes, outputs = reader.read({x: Shape(tuple(input_shape))})
    missed = {op.outs[0] for op in ops if op.chain is None and op.outs[0] not in flops}
    if missed:  # an operation expected to map did not: measure it too
        flops.update(_propagate(gm, input_shape, cls, missed)[1])
        ops, shapes, outputs = reader.read({x: Shape(tuple(input_shape))})
    blocks = plan(ops, shapes, [(x, x)], outputs)
    return build_design(name or _snake(cls), blocks, motifs, reader.notes())



def _defaults(module) -> dict:
    """Arguments of ``forward`` after the first that have defaults: traced with those values."""
    import inspect

    try:
        params = list(inspect.signature(module.forward).parameters.values())[1:]
    except (TypeError, ValueError):
        return {}
    return {p.name: p.default for p in params if p.default is not inspect.Parameter.empty}


def _snake(text: str) -> str:
    return re.sub(r"(?<=[a-z0-9])(?=[A-Z])", "-", text).lower()


def _maybe_mapped(gm, n) -> bool:
    """True for a call that a mapping rule handles (it may still fail :func:`confirm`)."""
    if n.op == "call_module":
        return type(gm.get_submodule(n.target)) in _MODULE_TYPES
    return n.op.startswith("call") and any(n.target in table for table, _ in _FUNCTION_RULES)


def _propagate(gm, input_shape, cls: str, measure: set[str]):
    """Run ``gm`` once on batch 1; every node's result, and the FLOPs of the nodes in ``measure``."""
    import torch
    from torch.utils.flop_counter import FlopCounterMode

    flops: dict[str, int] = {}
    results: dict[str, object] = {}

    class Measure(torch.fx.Interpreter):
        def run_node(self, n):
            if n.name in measure:
                with FlopCounterMode(display=False) as counter:
                    r = super().run_node(n)
                flops[n.name] = counter.get_total_flops()
            elif (n.op == "call_module" and type(self.module.get_submodule(n.target)) in _SHAPE_KEEPING
                  and getattr(self.env.get(n.args[0]), "is_meta", False)):
                r = torch.empty_like(self.env[n.args[0]])  # a norm or activation: same shape, no work on meta
            else:
                r = super().run_node(n)
            results[n.name] = r
            return r

    class Runner(torch.nn.Module):
        def __init__(self):
            super().__init__()
            self.gm = gm

        def forward(self, x):
            return Measure(self.gm).run(x)

    state = {f"gm.{k}": torch.empty_like(v, device="meta")
             for k, v in [*gm.named_parameters(remove_duplicate=False), *gm.named_buffers(remove_duplicate=False)]}
    try:
        with torch.no_grad():
            torch.func.functional_call(Runner(), state, (torch.empty(1, *input_shape, device="meta"),), strict=False)
        return results, flops
    except Exception:  # noqa: BLE001 — an operation without a meta kernel: run for real below
        flops.clear()
        results.clear()
    try:
        with torch.no_grad():
            Measure(gm).run(torch.zeros(1, *input_shape))
    except Exception as e:  # noqa: BLE001 — the user's module failing on this input, in one line
        raise ImportFailed(f"{cls} fails on an input of shape 1×{'×'.join(map(str, input_shape))} "
                           f"({type(e).__name__}: {one_line(e)}); give the input it expects with --input") from None
    return results, flops


class _Reader:
    """Turns traced nodes into :class:`SourceOp` records."""

    def __init__(self, gm, results, flops):
        self.gm, self.results, self.flops = gm, results, flops
        self.calls: dict[str, int] = {}
        self.named_params = dict(gm.named_parameters())
        self.named_buffers = dict(gm.named_buffers())

    def read(self, inputs: dict[str, Shape]):
        """Operations in execution order, the shape of every data value, and the values returned."""
        import torch

        self.calls.clear()
        data: set[str] = set()
        ops, shapes, outputs = [], dict(inputs), []
        for n in self.gm.graph.nodes:
            value = self.results.get(n.name)
            if n.op == "placeholder":
                if n.name in inputs:  # not an argument traced with its default
                    data.add(n.name)
                continue
            if n.op == "output":
                outputs = [a.name for a in _nodes(n.args) if a.name in data]
                if not outputs:
                    raise ImportFailed(f"{type(self.gm).__name__}: forward returns no tensor computed from its input")
                continue
            tensors = isinstance(value, torch.Tensor) or (
                isinstance(value, (tuple, list)) and value and all(isinstance(v, torch.Tensor) for v in value))
            if n.op == "get_attr" or not tensors or not any(a.name in data for a in n.all_input_nodes):
                continue
            data.add(n.name)
            shapes[n.name] = representable(list(value.shape)) if isinstance(value, torch.Tensor) and \
                value.is_floating_point() else None
            ins = [a.name for a in _nodes((n.args, n.kwargs)) if a.name in data]
            ops.append(self._op(n, ins, shapes))
        return ops, shapes, outputs

    def _op(self, n, ins, shapes) -> SourceOp:
        stack = list((n.meta.get("nn_module_stack") or {}).values())
        if n.op == "call_module":
            self.calls[n.target] = self.calls.get(n.target, 0) + 1
            stack = [s for s in stack if s[0] != n.target]
        scope = tuple((path, getattr(cls, "__name__", str(cls))) for path, cls in stack)
        weights, buffers, params = self._params(n)
        chain = None
        out = shapes[n.name]
        in_shapes = tuple(shapes.get(v) for v in ins)
        if out is not None and all(s is not None for s in in_shapes):
            try:
                proposed = self._map(n, in_shapes, out)
            except (TypeError, ValueError, AttributeError):
                proposed = None
            chain = confirm(proposed, in_shapes, out, weights, buffers)
        return SourceOp(self._name(n, scope), self._label(n), ins, [n.name], chain, scope, params,
                        self.flops.get(n.name, 0) // 2, n.name)

    def _params(self, n):
        """Weights and buffers the node owns (a module's, or those it reads with get_attr), by name."""
        params = {}
        if n.op == "call_module":
            m = self.gm.get_submodule(n.target)
            params.update({f"{n.target}.{k}": (p.numel(), False) for k, p in m.named_parameters()})
            params.update({f"{n.target}.{k}": (b.numel(), True) for k, b in m.named_buffers()})
        for a in n.all_input_nodes:
            if a.op == "get_attr":
                if a.target in self.named_params:
                    params[a.target] = (self.named_params[a.target].numel(), False)
                elif a.target in self.named_buffers:
                    params[a.target] = (self.named_buffers[a.target].numel(), True)
        weights = sum(k for k, is_buffer in params.values() if not is_buffer)
        return weights, sum(k for k, is_buffer in params.values() if is_buffer), params

    def _name(self, n, scope) -> str:
        if n.op == "call_module":
            return n.name
        base = re.sub(r"_\d+$", "", n.name)
        return f"{scope[-1][0].replace('.', '_')}_{base}" if scope else base

    def _label(self, n) -> str:
        if n.op == "call_module":
            return type(self.gm.get_submodule(n.target)).__name__
        if n.op == "call_method":
            return str(n.target)
        return getattr(n.target, "__name__", str(n.target))

    def notes(self) -> list[str]:
        shared = [t for t, k in self.calls.items()
                  if k > 1 and any(True for _ in self.gm.get_submodule(t).parameters())]
        return [f"{t} is called {self.calls[t]} times: the design gives each call its own weights" for t in shared]

    # ----- mapping
    def _map(self, n, ins: tuple[Shape, ...], out: Shape):
        if n.op == "call_module":
            return _module_chain(self.gm.get_submodule(n.target), ins, out)
        target = n.target
        for table, rule in _FUNCTION_RULES:
            if target in table:
                return rule(n, ins, out)
        return None


def _nodes(args) -> list:
    """The fx nodes in ``args`` (nested tuples, lists and dicts), in order."""
    import torch

    found = []
    torch.fx.node.map_arg(args, found.append)
    return found


def _arg(n, i: int, key: str, default=None):
    return n.args[i] if len(n.args) > i else n.kwargs.get(key, default)


def _module_chain(m, ins, out):
    from torch import nn

    t = type(m)
    if t is nn.Conv2d and m.padding_mode == "zeros":
        pad = "same" if m.padding == "same" else ((0, 0) if m.padding == "valid" else m.padding)
        return conv_chain(m.in_channels, m.out_channels, m.kernel_size, m.stride, pad, m.dilation, m.groups,
                          m.bias is not None)
    if t is nn.ConvTranspose2d and m.padding_mode == "zeros":
        return [("ConvTranspose2d", {"out_channels": m.out_channels, "kernel": list(m.kernel_size),
                                     "stride": list(m.stride), "padding": list(m.padding),
                                     "output_padding": list(m.output_padding), "dilation": list(m.dilation),
                                     "groups": m.groups, "bias": m.bias is not None})]
    if t is nn.BatchNorm2d:
        return [("BatchNorm2d", {"eps": float(m.eps), "affine": m.affine})]
    if t in _ACTIVATION_MODULES and (t is not nn.GELU or m.approximate == "none"):
        return [(_ACTIVATION_MODULES[t], {})]
    if t is nn.LeakyReLU:
        return [("LeakyReLU", {"negative_slope": float(m.negative_slope)})]
    if t is nn.Softmax:
        return _softmax(m.dim, ins)
    if t in (nn.MaxPool2d, nn.AvgPool2d):
        plain = (m.dilation == 1 and not m.return_indices) if t is nn.MaxPool2d else (
            m.count_include_pad and m.divisor_override is None)
        return _pool(t.__name__, m.kernel_size, m.stride, m.padding, m.ceil_mode) if plain else None
    if t is nn.AdaptiveAvgPool2d:
        return [("AdaptiveAvgPool2d", {"output": m.output_size})]
    if t is nn.Upsample:
        return _upsample(m.mode, m.align_corners, ins, out)
    if t is nn.Linear:
        return [("Linear", {"out_features": m.out_features, "bias": m.bias is not None, "in_features": m.in_features})]
    if t is nn.Flatten and m.start_dim == 1 and m.end_dim == -1:
        return _flatten(ins)
    if t is nn.Dropout:
        return [("Dropout", {"p": float(m.p)})]
    if t is nn.Identity:
        return [("Identity", {})]
    return None


def _pool(kind, kernel, stride, padding, ceil_mode):
    return [(kind, {"kernel": kernel, "stride": stride if stride not in (None, ()) else kernel, "padding": padding,
                    "ceil_mode": bool(ceil_mode)})]


def _softmax(dim, ins):
    return [("Softmax", {})] if dim in (1, -len(ins[0]) - 1) else None


def _flatten(ins):
    return [("Flatten", {})] if len(ins[0]) == 3 else [("Identity", {})]


def _upsample(mode, align_corners, ins, out):
    if mode not in ("nearest", "bilinear") or align_corners:
        return None
    return upsample_chain(*ins[0][1:], *out[1:], mode)


def _activation(n, ins, out):
    kind = _ACTIVATION_FUNCTIONS[n.target]
    if kind == "GELU" and n.kwargs.get("approximate", "none") != "none":
        return None
    if kind == "LeakyReLU":
        return [(kind, {"negative_slope": float(_arg(n, 1, "negative_slope", 0.01))})]
    return [(kind, {})]


def _join(kind):
    def rule(n, ins, out):
        data = [a for a in n.args[:2] if hasattr(a, "op")]
        if len(data) != 2 or len(n.args) > 2 or n.kwargs:
            return None
        return [(kind, {})]
    return rule


def _cat(n, ins, out):
    dim = _arg(n, 1, "dim", 0)
    if dim not in (1, -len(ins[0])) or len(ins) < 2 or len(n.args[0]) != len(ins):
        return None
    return [("Concat", {"inputs": len(ins)})]


def _torch_flatten(n, ins, out):
    start, end = _arg(n, 1, "start_dim", 0), _arg(n, 2, "end_dim", -1)
    return _flatten(ins) if start == 1 and end == -1 else None


def _reshape(n, ins, out):
    if out == ins[0]:
        return [("Identity", {})]
    return [("Flatten", {})] if len(ins[0]) == 3 and len(out) == 1 else None


def _mean(n, ins, out):
    dims = _arg(n, 1, "dim")
    dims = {d % 4 for d in (dims if isinstance(dims, (list, tuple)) else [dims])} if dims is not None else None
    if len(ins[0]) != 3 or dims != {2, 3} or n.kwargs.get("dtype") is not None:
        return None
    pool = [("AdaptiveAvgPool2d", {"output": 1})]
    return pool if _arg(n, 2, "keepdim", False) else pool + [("Flatten", {})]


def _function_pool(n, ins, out):
    import torch.nn.functional as F

    kernel = _arg(n, 1, "kernel_size")
    stride, padding = _arg(n, 2, "stride"), _arg(n, 3, "padding", 0)
    if n.target is F.max_pool2d:
        if _arg(n, 4, "dilation", 1) != 1 or _arg(n, 6, "return_indices", False):
            return None
        return _pool("MaxPool2d", kernel, stride, padding, _arg(n, 5, "ceil_mode", False))
    if not _arg(n, 5, "count_include_pad", True) or _arg(n, 6, "divisor_override") is not None:
        return None
    return _pool("AvgPool2d", kernel, stride, padding, _arg(n, 4, "ceil_mode", False))


def _adaptive(n, ins, out):
    return [("AdaptiveAvgPool2d", {"output": _arg(n, 1, "output_size")})]


def _interpolate(n, ins, out):
    return _upsample(_arg(n, 3, "mode", "nearest"), _arg(n, 4, "align_corners"), ins, out)


def _dropout(n, ins, out):
    return [("Dropout", {"p": float(_arg(n, 1, "p", 0.5))})]


def _identity(n, ins, out):
    return [("Identity", {})]


def _softmax_function(n, ins, out):
    return _softmax(_arg(n, 1, "dim"), ins)


def _tables():
    import torch
    import torch.nn.functional as F
    from torch import nn

    modules = {nn.ReLU: "ReLU", nn.ReLU6: "ReLU6", nn.GELU: "GELU", nn.SiLU: "SiLU", nn.Sigmoid: "Sigmoid",
               nn.Tanh: "Tanh", nn.Hardswish: "Hardswish"}
    functions = {F.relu: "ReLU", torch.relu: "ReLU", "relu": "ReLU", F.relu_: "ReLU", torch.relu_: "ReLU",
                 "relu_": "ReLU", F.relu6: "ReLU6", F.gelu: "GELU", F.silu: "SiLU", torch.sigmoid: "Sigmoid",
                 "sigmoid": "Sigmoid", torch.tanh: "Tanh", "tanh": "Tanh", F.hardswish: "Hardswish",
                 F.leaky_relu: "LeakyReLU"}
    rules = [(set(functions), _activation),
             ({operator.add, operator.iadd, torch.add, "add", "add_"}, _join("Add")),
             ({operator.mul, operator.imul, torch.mul, "mul", "mul_"}, _join("Multiply")),
             ({torch.cat, torch.concat, torch.concatenate}, _cat),
             ({torch.flatten, "flatten"}, _torch_flatten),
             ({"view", "reshape", torch.reshape}, _reshape),
             ({torch.mean, "mean"}, _mean),
             ({F.max_pool2d, F.avg_pool2d}, _function_pool),
             ({F.adaptive_avg_pool2d}, _adaptive),
             ({F.interpolate}, _interpolate),
             ({F.dropout}, _dropout),
             ({"contiguous"}, _identity),
             ({F.softmax, torch.softmax, "softmax"}, _softmax_function)]
    module_types = {nn.Conv2d, nn.ConvTranspose2d, nn.BatchNorm2d, nn.LeakyReLU, nn.Softmax, nn.MaxPool2d,
                    nn.AvgPool2d, nn.AdaptiveAvgPool2d, nn.Upsample, nn.Linear, nn.Flatten, nn.Dropout, nn.Identity,
                    *modules}
    _SHAPE_KEEPING.update({nn.BatchNorm2d, nn.LeakyReLU, nn.Dropout, nn.Identity, *modules})
    return module_types, modules, functions, rules


_MODULE_TYPES: set = set()
_SHAPE_KEEPING: set = set()  # module types whose output has the input's shape (propagated without running)
_ACTIVATION_MODULES: dict = {}
_ACTIVATION_FUNCTIONS: dict = {}
_FUNCTION_RULES: list = []


def _load_tables() -> None:
    """Fill the mapping tables (they name torch objects, so torch is imported only on first import)."""
    if not _FUNCTION_RULES:
        module_types, modules, functions, rules = _tables()
        _MODULE_TYPES.update(module_types)
        _ACTIVATION_MODULES.update(modules)
        _ACTIVATION_FUNCTIONS.update(functions)
        _FUNCTION_RULES.extend(rules)
