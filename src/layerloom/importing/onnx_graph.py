"""Reading an ONNX file (the open standard) as a design.

The graph is checked (``onnx.checker``), its shapes inferred (``onnx.shape_inference``, after
``--input`` replaced the input's sizes), and every node that reads the image's data and produces
floating-point data becomes an operation; shape arithmetic (Shape, Gather, Concat of sizes, …) is
left out. Weights come from the initializers each node reads. Settings of mapped blocks come from
the node's attributes and weight shapes and are confirmed against the inferred output shape and
the initializers' sizes (:func:`layerloom.importing.mapping.confirm`); a batch norm carries 2·C
running statistics in the file plus the batch counter our ledger counts as a buffer.

Unmapped ONNX operations carry their shape and weights; their MACs are not counted (0), which the
import says in a note. Node names written by PyTorch's exporter (``/layer1/layer1.0/conv1/Conv``)
give block names (``layer1_0_conv1``) and the submodule scopes that motifs are found in.
"""
from __future__ import annotations

import math
import re
from pathlib import Path
from typing import NamedTuple

from layerloom.core.shapes import Shape
from layerloom.importing.build import Imported, build_design
from layerloom.importing.mapping import chain_shape, confirm, conv_chain, representable, upsample_chain
from layerloom.importing.plan import ImportFailed, SourceOp, one_line, plan

FLOAT_TYPES = {1, 10, 11, 16}  # FLOAT, FLOAT16, DOUBLE, BFLOAT16


def import_onnx(path: str, input_shape: Shape | None = None, motifs: bool = True) -> Imported:
    """A design read from the ONNX file ``path``; ``input_shape`` (C×H×W) replaces the input's sizes."""
    import onnx

    model = _load(path)
    known = onnx.defs.onnx_opset_version()
    for entry in model.opset_import:
        if entry.domain in ("", "ai.onnx") and entry.version > known:
            raise ImportFailed(f"{path} uses ONNX opset {entry.version}, newer than the opsets 1–{known} this onnx "
                               "package knows; export it with an older opset or upgrade onnx")
    graph = model.graph
    initializers = _lighten(graph)
    try:
        onnx.checker.check_model(model)
    except Exception as e:  # noqa: BLE001 — onnx raises several kinds; all mean the same to the user
        raise ImportFailed(f"{path} is not a valid ONNX model: {one_line(e)}") from None
    inputs = [i for i in graph.input if i.name not in initializers]
    if len(inputs) != 1:
        raise ImportFailed(f"{path} has {len(inputs)} graph inputs; import reads networks with one image input")
    if input_shape is not None:
        dims = inputs[0].type.tensor_type.shape.dim
        if len(dims) != 4:
            raise ImportFailed(f"{path}: its input has {len(dims)} dimensions, so --input C×H×W does not apply")
        for d, v in zip(dims, (1, *input_shape)):
            d.Clear()
            d.dim_value = v
        del graph.value_info[:]
    try:
        model = onnx.shape_inference.infer_shapes(model, strict_mode=True, data_prop=True)
    except Exception as e:  # noqa: BLE001
        raise ImportFailed(f"{path}: shape inference fails ({one_line(e)})") from None
    reader = _Reader(model.graph, initializers)
    x = inputs[0].name
    if reader.shapes.get(x) is None or len(reader.shapes[x]) != 3:
        raise ImportFailed(f"{path}: the input {x} has sizes {reader.dims.get(x)}, not N×C×H×W with fixed C, H and "
                           "W; give them with --input CxHxW")
    ops, outputs = reader.read(x)
    blocks = plan(ops, reader.shapes, [(x, _safe(x) or "input")], outputs)
    notes = []
    unmapped = [op for op in ops if op.chain is None]
    if unmapped:
        notes.append(f"{len(unmapped)} ONNX operation{'s' if len(unmapped) != 1 else ''} could not be mapped; "
                     "their MACs are not counted")
    named = (graph.name or "").strip() not in ("", "main_graph", "torch_jit")
    name = re.sub(r"[^\w-]+", "-", graph.name if named else Path(path).stem).strip("-").lower() or "imported"
    return build_design(name, blocks, motifs, notes)


def _load(path: str):
    import onnx

    try:
        model = onnx.load(path, load_external_data=False)
    except FileNotFoundError:
        raise ImportFailed(f"{path}: no such file") from None
    except Exception as e:  # noqa: BLE001 — a truncated or foreign file fails in the protobuf decoder
        raise ImportFailed(f"{path} is not a readable ONNX file, perhaps truncated ({one_line(e)})") from None
    if not model.graph.node:
        raise ImportFailed(f"{path} holds no ONNX graph (no nodes)")
    return model


class Tensor(NamedTuple):
    """An initializer as import needs it: sizes, element type, and the proto for small ones (values
    such as a Clip's bounds) — None for large ones (weights), whose data import never reads."""

    dims: list
    data_type: int
    proto: object | None


SMALL = 64  # elements: initializers up to this size keep their data for the checker and shape inference


def _lighten(graph) -> dict[str, Tensor]:
    """Describe the initializers, and turn the large ones into typed graph inputs, so that checking
    and shape inference do not copy the weights (hundreds of megabytes for a large network)."""
    from onnx import helper

    kept = []
    for t in graph.initializer:
        if math.prod(t.dims) <= SMALL:
            kept.append(type(t)())
            kept[-1].CopyFrom(t)
    described = {t.name: Tensor(list(t.dims), t.data_type, None) for t in graph.initializer}
    for t in kept:
        described[t.name] = described[t.name]._replace(proto=t)
    big = [helper.make_tensor_value_info(name, t.data_type, t.dims) for name, t in described.items() if t.proto is None]
    del graph.initializer[:]
    graph.initializer.extend(kept)
    graph.input.extend(big)
    return described



def _safe(text: str) -> str:
    return re.sub(r"\W+", "_", text).strip("_").lower()


class _Reader:
    """Turns ONNX nodes into :class:`SourceOp` records."""

    def __init__(self, graph, initializers):
        from onnx import helper, numpy_helper

        self.graph, self.initializers = graph, dict(initializers)
        for n in graph.node:  # PyTorch's exporter stores equal tensors once and names the others by Identity
            if n.op_type == "Identity" and n.input[0] in self.initializers:
                self.initializers[n.output[0]] = self.initializers[n.input[0]]
        self.numpy, self.attribute = numpy_helper.to_array, helper.get_attribute_value
        self.dims: dict[str, list] = {}
        self.floats: set[str] = set()
        for vi in (*graph.input, *graph.value_info, *graph.output):
            t = vi.type.tensor_type
            dims = [d.dim_value if d.HasField("dim_value") else None for d in t.shape.dim]
            if dims and dims[0] is None:
                dims[0] = 1  # a symbolic batch: read with batch 1
            self.dims[vi.name] = dims
            if t.elem_type in FLOAT_TYPES:
                self.floats.add(vi.name)
        self.shapes = {v: representable(d) if v in self.floats else None for v, d in self.dims.items()}
        self.constants = {n.output[0]: n for n in graph.node if n.op_type == "Constant"}
        self.readers: dict[str, list] = {}
        self.producer = {}
        for n in graph.node:
            for v in n.input:
                self.readers.setdefault(v, []).append(n)
            for v in n.output:
                self.producer[v] = n

    def const(self, name: str):
        """The value of a small initializer, a Constant, or a Concat, Unsqueeze, Cast or Identity of
        such values (sizes the exporter computes without folding), as a numpy array; else None."""
        import numpy as np

        if name in self.initializers:
            proto = self.initializers[name].proto
            return self.numpy(proto) if proto is not None else None
        node = self.constants.get(name) or self.producer.get(name)
        if node is None:
            return None
        if node.op_type == "Constant":
            value = next((a.t for a in node.attribute if a.name == "value"), None)
            return self.numpy(value) if value is not None else None
        parts = [self.const(v) for v in node.input[:1 if node.op_type != "Concat" else None]]
        if node.op_type not in ("Concat", "Unsqueeze", "Cast", "Identity") or any(p is None for p in parts):
            return None
        if node.op_type == "Concat":
            return np.concatenate([np.atleast_1d(p) for p in parts])
        return np.atleast_1d(parts[0]) if node.op_type == "Unsqueeze" else parts[0]

    def read(self, x: str):
        """Operations in graph order and the values the graph returns."""
        data = {x}
        ops, fused, skipped = [], {}, set()
        for n in self.graph.node:
            if not any(v in data for v in n.input):
                continue
            outs = [v for v in n.output if v in self.floats or (v and v not in self.dims)]  # unknown: a custom op's
            data.update(outs)
        for n in self.graph.node:
            pattern = self._gated(n, data) if self._is_op(n, data) else None
            if pattern is not None:
                fused[id(n)], producer = pattern
                skipped.add(id(producer))
        scopes = self._scopes([n for n in self.graph.node if self._is_op(n, data)])
        for n in self.graph.node:
            if not self._is_op(n, data) or id(n) in skipped:
                continue
            ins = [v for v in n.input if v in data]
            outs = [v for v in n.output if v in data]
            name, scope = scopes[id(n)]
            weights_read = {v: self.initializers[v] for v in n.input if v in self.initializers}
            params = {v: (math.prod(t.dims), False) for v, t in weights_read.items()
                      if t.data_type in FLOAT_TYPES and t.dims}  # a scalar (a Clip bound) is no weight
            chain = None
            if id(n) in fused:
                chain, ins = fused[id(n)]
            out = self.shapes.get(outs[0]) if len(outs) == 1 else None
            in_shapes = tuple(self.shapes.get(v) for v in ins)
            if len(outs) == 1 and all(s is not None for s in in_shapes):
                if chain is None:
                    try:
                        chain = self._map(n, in_shapes, out)
                    except (TypeError, ValueError, KeyError, IndexError):
                        chain = None
                if out is None:  # shape inference could not tell (sizes computed in the graph): our rule does
                    out = self.shapes[outs[0]] = chain_shape(chain, in_shapes)
            if out is not None and all(s is not None for s in in_shapes):
                weights = sum(k for k, _ in params.values())
                buffers = 0
                if n.op_type == "BatchNormalization":
                    weights = sum(params[v][0] for v in n.input[1:3] if v in params)
                    buffers = sum(params[v][0] for v in n.input[3:5] if v in params) + 1  # + the batch counter
                chain = confirm(chain, in_shapes, out, weights, buffers)
            else:
                chain = None
            ops.append(SourceOp(name, n.op_type, ins, outs, chain, scope, params, 0, n.name or outs[0]))
        outputs = [o.name for o in self.graph.output if o.name in data]
        if not outputs:
            raise ImportFailed("no output of the graph is computed from its input")
        return ops, outputs

    def _is_op(self, n, data) -> bool:
        return any(v in data for v in n.input) and any(v in data for v in n.output)

    def _gated(self, n, data):
        """``x · hardsigmoid(x)`` → Hardswish and ``x · sigmoid(x)`` → SiLU: (chain, inputs) and the gate node."""
        if n.op_type != "Mul" or len(n.input) != 2:
            return None
        for a, b in (n.input, reversed(n.input)):
            producer = self.producer.get(b)
            if producer is None or list(producer.input) != [a] or len(self.readers.get(b, [])) != 1:
                continue
            attrs = self._attrs(producer)
            if producer.op_type == "Sigmoid":
                return ([("SiLU", {})], [a]), producer
            if (producer.op_type == "HardSigmoid" and abs(attrs.get("alpha", 0.2) - 1 / 6) < 1e-6
                    and abs(attrs.get("beta", 0.5) - 0.5) < 1e-6):
                return ([("Hardswish", {})], [a]), producer
        return None

    def _scopes(self, nodes) -> dict:
        """Per node: its block name and its scope ((path, None), …) from the exporter's node name."""
        paths = {}
        for n in nodes:
            parts = [p for p in (n.name or "").split("/") if p]
            segs, full = [], ""
            previous = ""
            for p in parts[:-1]:
                for stem in (previous, full):
                    if stem and p.startswith(stem + "."):
                        segs.append(p[len(stem) + 1:])
                        break
                else:
                    segs.append(p)
                previous, full = p, ".".join(segs)
            paths[id(n)] = (".".join(segs), parts[-1] if parts else n.op_type)
        hosted: dict[str, int] = {}
        inner = set()  # paths with deeper paths below them: submodules, never leaves
        for path, _ in paths.values():
            hosted[path] = hosted.get(path, 0) + 1
            parts = path.split(".")
            inner.update(".".join(parts[:k]) for k in range(1, len(parts)))
        out = {}
        for n in nodes:
            path, piece = paths[id(n)]
            scope_paths = [".".join(path.split(".")[:k]) for k in range(1, path.count(".") + 2)] if path else []
            if path and hosted[path] == 1 and path not in inner:
                name = path.replace(".", "_")
                scope_paths = scope_paths[:-1]
            else:
                name = "_".join(filter(None, (path.replace(".", "_"), _safe(piece))))
            out[id(n)] = (_safe(name) or _safe(n.op_type), tuple((p, None) for p in scope_paths))
        return out

    def _attrs(self, n) -> dict:
        return {a.name: self.attribute(a) for a in n.attribute}

    # ----- mapping
    def _map(self, n, ins, out):
        rule = _RULES.get(n.op_type)
        return rule(self, n, self._attrs(n), ins, out) if rule else None

    def _weight_dims(self, name: str):
        t = self.initializers.get(name)
        if t is not None:
            return t.dims
        value = self.const(name)
        return list(value.shape) if value is not None else None


def _symmetric(pads):
    pads = list(pads or (0, 0, 0, 0))
    if len(pads) != 4 or pads[0] != pads[2] or pads[1] != pads[3]:
        raise ValueError("asymmetric padding")
    return pads[0], pads[1]


def _plain_pad(a) -> None:
    if a.get("auto_pad", b"NOTSET") not in (b"NOTSET", "NOTSET", b"VALID", "VALID"):
        raise ValueError("automatic padding")


def _conv(r, n, a, ins, out):
    _plain_pad(a)
    w = r._weight_dims(n.input[1])
    if w is None or len(w) != 4:
        return None
    bias = len(n.input) > 2 and bool(n.input[2])
    return conv_chain(ins[0][0], w[0], w[2:], a.get("strides", (1, 1)), _symmetric(a.get("pads")),
                      a.get("dilations", (1, 1)), a.get("group", 1), bias)


def _conv_transpose(r, n, a, ins, out):
    _plain_pad(a)
    w = r._weight_dims(n.input[1])
    if w is None or len(w) != 4 or "output_shape" in a:
        return None
    g = a.get("group", 1)
    return [("ConvTranspose2d", {"out_channels": w[1] * g, "kernel": list(w[2:]),
                                 "stride": list(a.get("strides", (1, 1))), "padding": list(_symmetric(a.get("pads"))),
                                 "output_padding": list(a.get("output_padding", (0, 0))),
                                 "dilation": list(a.get("dilations", (1, 1))), "groups": g,
                                 "bias": len(n.input) > 2 and bool(n.input[2])})]


def _batch_norm(r, n, a, ins, out):
    if a.get("training_mode", 0):
        return None
    return [("BatchNorm2d", {"eps": float(a.get("epsilon", 1e-5)), "affine": True})]


def _simple(kind):
    return lambda r, n, a, ins, out: [(kind, {})]


def _gelu(r, n, a, ins, out):
    return [("GELU", {})] if a.get("approximate", b"none") in (b"none", "none") else None


def _leaky(r, n, a, ins, out):
    return [("LeakyReLU", {"negative_slope": float(a.get("alpha", 0.01))})]


def _clip(r, n, a, ins, out):
    low = r.const(n.input[1]) if len(n.input) > 1 and n.input[1] else a.get("min")
    high = r.const(n.input[2]) if len(n.input) > 2 and n.input[2] else a.get("max")
    low = None if low is None else float(low)
    high = None if high is None else float(high)
    if low == 0.0 and high == 6.0:
        return [("ReLU6", {})]
    return [("ReLU", {})] if low == 0.0 and high is None else None


def _softmax(r, n, a, ins, out):
    return [("Softmax", {})] if a.get("axis", 1) in (1, -len(ins[0]) - 1) and (len(ins[0]) == 1 or "axis" in a) else None


def _join(kind):
    def rule(r, n, a, ins, out):
        return [(kind, {"inputs": len(ins)} if kind == "Add" and len(ins) != 2 else {})] if len(ins) == len(n.input) else None
    return rule


def _concat(r, n, a, ins, out):
    if len(ins) != len(n.input) or a.get("axis") not in (1, -len(ins[0])):
        return None
    return [("Concat", {"inputs": len(ins)})]


def _pool(kind):
    def rule(r, n, a, ins, out):
        _plain_pad(a)
        if any(d != 1 for d in a.get("dilations", (1, 1))):
            return None
        pads = _symmetric(a.get("pads"))
        if kind == "AvgPool2d" and any(pads) and not a.get("count_include_pad", 0):
            return None
        return [(kind, {"kernel": list(a["kernel_shape"]), "stride": list(a.get("strides", (1, 1))),
                        "padding": list(pads), "ceil_mode": bool(a.get("ceil_mode", 0))})]
    return rule


def _global_pool(r, n, a, ins, out):
    return [("AdaptiveAvgPool2d", {"output": 1})]


def _reduce_mean(r, n, a, ins, out):
    axes = a.get("axes")
    if axes is None and len(n.input) > 1:
        axes = r.const(n.input[1])
    if axes is None or len(ins[0]) != 3 or {int(x) % 4 for x in axes} != {2, 3}:
        return None
    pool = [("AdaptiveAvgPool2d", {"output": 1})]
    return pool if a.get("keepdims", 1) else pool + [("Flatten", {})]


def _flatten(r, n, a, ins, out):
    if a.get("axis", 1) != 1:
        return None
    return [("Flatten", {})] if len(ins[0]) == 3 else [("Identity", {})]


def _gemm(r, n, a, ins, out):
    w = r._weight_dims(n.input[1])
    if w is None or len(w) != 2 or a.get("transA", 0) or a.get("alpha", 1.0) != 1.0 or a.get("beta", 1.0) != 1.0:
        return None
    n_in, n_out = (w[1], w[0]) if a.get("transB", 0) else (w[0], w[1])
    return [("Linear", {"out_features": n_out, "bias": len(n.input) > 2 and bool(n.input[2]), "in_features": n_in})]


def _matmul(r, n, a, ins, out):
    w = r._weight_dims(n.input[1])
    if w is None or len(w) != 2 or n.input[1] in ins:
        return None
    return [("Linear", {"out_features": w[1], "bias": False, "in_features": w[0]})]


def _resize(r, n, a, ins, out):
    mode = a.get("mode", b"nearest")
    mode = mode.decode() if isinstance(mode, bytes) else mode
    ctm = a.get("coordinate_transformation_mode", b"half_pixel")
    ctm = ctm.decode() if isinstance(ctm, bytes) else ctm
    if mode == "nearest" and ctm == "asymmetric" and a.get("nearest_mode", b"floor") in (b"floor", "floor"):
        kind = "nearest"
    elif mode == "linear" and ctm in ("half_pixel", "pytorch_half_pixel"):
        kind = "bilinear"
    elif n.op_type == "Upsample" and mode == "nearest":
        kind = "nearest"
    else:
        return None
    h, w = ins[0][1:]
    if out is None:
        scales = r.const(n.input[2]) if len(n.input) > 2 and n.input[2] else None
        sizes = r.const(n.input[3]) if len(n.input) > 3 and n.input[3] else None
        if scales is not None and len(scales) == 4:
            oh, ow = h * float(scales[2]), w * float(scales[3])
        elif sizes is not None and len(sizes) == 4:
            oh, ow = int(sizes[2]), int(sizes[3])
        else:
            return None
    else:
        oh, ow = out[1:]
    return upsample_chain(h, w, oh, ow, kind)


def _reshape(r, n, a, ins, out):
    if out is None:
        target = r.const(n.input[1])
        if target is None or len(target) != 2 or len(ins[0]) != 3:
            return None
        return [("Flatten", {})]
    if out == ins[0]:
        return [("Identity", {})]
    return [("Flatten", {})] if len(ins[0]) == 3 and len(out) == 1 else None


def _dropout(r, n, a, ins, out):
    ratio = r.const(n.input[1]) if len(n.input) > 1 and n.input[1] else a.get("ratio", 0.5)
    return [("Dropout", {"p": float(ratio)})]


_RULES = {"Conv": _conv, "ConvTranspose": _conv_transpose, "BatchNormalization": _batch_norm,
          "Relu": _simple("ReLU"), "Sigmoid": _simple("Sigmoid"), "Tanh": _simple("Tanh"),
          "HardSwish": _simple("Hardswish"), "Gelu": _gelu, "LeakyRelu": _leaky, "Clip": _clip, "Softmax": _softmax,
          "Add": _join("Add"), "Sum": _join("Add"), "Mul": _join("Multiply"), "Concat": _concat,
          "MaxPool": _pool("MaxPool2d"), "AveragePool": _pool("AvgPool2d"), "GlobalAveragePool": _global_pool,
          "ReduceMean": _reduce_mean, "Flatten": _flatten, "Gemm": _gemm, "MatMul": _matmul, "Resize": _resize,
          "Upsample": _resize, "Reshape": _reshape, "Dropout": _dropout, "Identity": _simple("Identity")}
