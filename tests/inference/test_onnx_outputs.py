"""The output order read from an ONNX file equals what the onnx package itself reads."""

import onnx
from onnx import TensorProto, helper

from app.inference.network import onnx_output_names


def test_declared_output_order_matches_the_onnx_package(tmp_path):
    """Source: the ``onnx`` package's own loader (``onnx.load(...).graph.output``), on a
    synthetic model whose outputs are deliberately not in alphabetical order."""
    names = ["heat", "field", "alpha", "zeta"]
    x = helper.make_tensor_value_info("x", TensorProto.FLOAT, [1, 3, 8, 8])
    outs = [helper.make_tensor_value_info(n, TensorProto.FLOAT, [1, 3, 8, 8]) for n in names]
    weights = helper.make_tensor("w", TensorProto.FLOAT, [4096], [0.5] * 4096)  # bulk to skip
    nodes = [helper.make_node("Identity", ["x"], [n]) for n in names]
    model = helper.make_model(helper.make_graph(nodes, "g", [x], outs, initializer=[weights]))
    path = tmp_path / "m.onnx"
    onnx.save(model, str(path))
    assert onnx_output_names(path) == [o.name for o in onnx.load(str(path)).graph.output] == names


def test_unreadable_files_give_none(tmp_path):
    (tmp_path / "junk.onnx").write_bytes(b"\x3a\xff\xff\xff\xff\x0f")
    assert onnx_output_names(tmp_path / "junk.onnx") is None
    assert onnx_output_names(tmp_path / "missing.onnx") is None
