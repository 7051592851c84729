package web

import (
	"bytes"
	"encoding/json"
	"path"
	"strings"
	"unicode/utf8"

	"rolloff/sweep/queue"
)

// MaxPlanNameBytes is the longest plan file name kept with a run.
const MaxPlanNameBytes = 64

// upload is a plan file sent as its text: exactly one of PlanTOML and
// PlanJSON.
type upload struct {
	PlanTOML *string `json:"plan_toml"`
	PlanJSON *string `json:"plan_json"`
	FileName string  `json:"file_name"`
}

// decodeUpload reads {"plan_toml" or "plan_json": text, "file_name":
// name}: the document as the file holds it, and the file's name made
// safe to keep and to show.
func decodeUpload(data []byte) (queue.Source, error) {
	var up upload
	dec := json.NewDecoder(bytes.NewReader(data))
	dec.DisallowUnknownFields()
	if err := dec.Decode(&up); err != nil {
		return queue.Source{}, badRequest("plan_toml", "plan upload: %v (want {\"plan_toml\": \"...\", \"file_name\": \"...\"} or {\"plan_json\": \"...\", \"file_name\": \"...\"})", err)
	}
	if dec.More() {
		return queue.Source{}, badRequest("body", "plan upload: data after the object")
	}
	switch {
	case up.PlanTOML != nil && up.PlanJSON != nil:
		return queue.Source{}, badRequest("plan_json", "plan upload: give plan_toml or plan_json, not both")
	case up.PlanJSON != nil:
		return queue.Source{Name: planFileName(up.FileName, ".json"), Data: []byte(*up.PlanJSON)}, nil
	case up.PlanTOML != nil:
		return queue.Source{Name: planFileName(up.FileName, ".toml"), Data: []byte(*up.PlanTOML)}, nil
	}
	return queue.Source{}, badRequest("plan_toml", "plan upload: plan_toml or plan_json is required")
}

// planFileName makes the name a plan file was chosen under safe to keep
// with a run and to print: its base name only, letters, digits, '.', '_',
// '-' and spaces (anything else, control characters included, becomes
// '_'), at most MaxPlanNameBytes bytes, ending in ext (".toml" or
// ".json", as the text is decoded). An empty name becomes
// "uploaded-plan"+ext.
func planFileName(name, ext string) string {
	name = path.Base(strings.ReplaceAll(name, "\\", "/"))
	if !utf8.ValidString(name) {
		name = strings.ToValidUTF8(name, "_")
	}
	var b strings.Builder
	for _, c := range name {
		switch {
		case c >= 'a' && c <= 'z', c >= 'A' && c <= 'Z', c >= '0' && c <= '9', c == '.', c == '_', c == '-':
			b.WriteRune(c)
		case c == ' ':
			b.WriteByte(' ')
		default:
			b.WriteByte('_')
		}
	}
	stem := strings.Trim(b.String(), " .")
	if strings.EqualFold(path.Ext(stem), ext) {
		stem = stem[:len(stem)-len(ext)]
	}
	if max := MaxPlanNameBytes - len(ext); len(stem) > max {
		stem = strings.TrimRight(stem[:max], " .")
	}
	if stem == "" || stem == "/" {
		stem = "uploaded-plan"
	}
	return stem + ext
}
