package modelio

import "fovea/modelio/onnxpb"

func attr(n *onnxpb.NodeProto, name string) *onnxpb.AttributeProto {
	for _, a := range n.GetAttribute() {
		if a.GetName() == name {
			return a
		}
	}
	return nil
}

func attrInt(n *onnxpb.NodeProto, name string, def int64) int64 {
	if a := attr(n, name); a != nil {
		return a.GetI()
	}
	return def
}

func attrFloat(n *onnxpb.NodeProto, name string, def float64) float64 {
	if a := attr(n, name); a != nil {
		return float64(a.GetF())
	}
	return def
}

func attrInts(n *onnxpb.NodeProto, name string) ([]int64, bool) {
	if a := attr(n, name); a != nil {
		return a.GetInts(), true
	}
	return nil, false
}

func attrFloats(n *onnxpb.NodeProto, name string) ([]float32, bool) {
	if a := attr(n, name); a != nil {
		return a.GetFloats(), true
	}
	return nil, false
}

func attrString(n *onnxpb.NodeProto, name, def string) string {
	if a := attr(n, name); a != nil {
		return string(a.GetS())
	}
	return def
}
