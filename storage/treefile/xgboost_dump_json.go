package treefile

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"strconv"

	"splitledger/importance/forest"
)

// dumpJSONNode is one node of get_dump(dump_format="json"): internal nodes
// carry split, split_condition (a number, or a list of categories for a
// categorical split), yes, no, missing and children; leaves carry leaf.
// gain and cover are present with with_stats=True.
type dumpJSONNode struct {
	NodeID         *int64          `json:"nodeid"`
	Split          json.RawMessage `json:"split"`
	SplitCondition json.RawMessage `json:"split_condition"`
	Yes            *int64          `json:"yes"`
	No             *int64          `json:"no"`
	Missing        *int64          `json:"missing"`
	Gain           json.RawMessage `json:"gain"`
	Cover          json.RawMessage `json:"cover"`
	Leaf           json.RawMessage `json:"leaf"`
	Children       []dumpJSONNode  `json:"children"`
}

// readXGBoostDumpJSON reads a JSON list of XGBoost JSON tree dumps (the
// strings of get_dump(dump_format="json", with_stats=True) joined into one
// list). Errors name the tree and the dump's node id. See buildDumpEnsemble
// for the split semantics and Options for what a dump does not record.
func readXGBoostDumpJSON(data []byte, name string, opts Options) (*forest.Ensemble, error) {
	clean := quoteNonFinite(data)
	var roots []dumpJSONNode
	if err := json.Unmarshal(clean, &roots); err != nil {
		return nil, fileErr(name, jsonErrorLine(clean, err), fmt.Errorf("invalid XGBoost JSON dump: %w", err))
	}
	trees := make([]dumpTree, len(roots))
	for ti := range roots {
		var nodes []dumpNode
		if err := flattenDumpJSON(&roots[ti], &nodes); err != nil {
			return nil, nodeErr(name, ti, -1, err)
		}
		trees[ti] = dumpTree{nodes: nodes}
	}
	return buildDumpEnsemble(trees, FormatXGBoostDumpJSON, name, opts, false)
}

// flattenDumpJSON appends j and its descendants (depth first) to out.
func flattenDumpJSON(j *dumpJSONNode, out *[]dumpNode) error {
	if j.NodeID == nil {
		return errors.New("node without \"nodeid\"")
	}
	n := dumpNode{id: *j.NodeID}
	where := func(err error) error { return fmt.Errorf("node %d: %w", n.id, err) }
	var err error
	if j.Cover != nil {
		if n.cover, err = parseJSONFloat(bytes.TrimSpace(j.Cover)); err != nil {
			return where(fmt.Errorf("cover: %w", err))
		}
		n.hasCover = true
	}
	if j.Leaf != nil {
		n.leaf = true
		if n.value, err = parseJSONFloat(bytes.TrimSpace(j.Leaf)); err != nil {
			return where(fmt.Errorf("leaf: %w", err))
		}
		*out = append(*out, n)
		return nil
	}
	if j.Split == nil || j.SplitCondition == nil || j.Yes == nil || j.No == nil || j.Missing == nil {
		return where(errors.New("split node needs split, split_condition, yes, no and missing"))
	}
	if n.feature, err = dumpSplitName(j.Split); err != nil {
		return where(err)
	}
	cond := bytes.TrimSpace(j.SplitCondition)
	if len(cond) > 0 && cond[0] == '[' {
		var cats jsonInts
		if err := json.Unmarshal(cond, &cats); err != nil {
			return where(fmt.Errorf("split_condition: %w", err))
		}
		n.cats = append([]int64{}, cats...)
	} else if n.threshold, err = parseJSONFloat(cond); err != nil {
		return where(fmt.Errorf("split_condition: %w", err))
	}
	n.yes, n.no, n.mis = *j.Yes, *j.No, *j.Missing
	if j.Gain != nil {
		if n.gain, err = parseJSONFloat(bytes.TrimSpace(j.Gain)); err != nil {
			return where(fmt.Errorf("gain: %w", err))
		}
		n.hasGain = true
	}
	*out = append(*out, n)
	for k := range j.Children {
		if err := flattenDumpJSON(&j.Children[k], out); err != nil {
			return err
		}
	}
	return nil
}

// dumpSplitName reads the split feature: a name string, or a bare index
// number which stands for fN.
func dumpSplitName(raw json.RawMessage) (string, error) {
	raw = bytes.TrimSpace(raw)
	if len(raw) > 0 && raw[0] == '"' {
		var s string
		if err := json.Unmarshal(raw, &s); err != nil {
			return "", fmt.Errorf("split: %w", err)
		}
		if s == "" {
			return "", errors.New("empty split feature name")
		}
		return s, nil
	}
	k, err := strconv.ParseUint(string(raw), 10, 31)
	if err != nil {
		return "", fmt.Errorf("split %s is neither a name nor a feature index", preview(raw))
	}
	return "f" + strconv.FormatUint(k, 10), nil
}
