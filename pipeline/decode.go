package pipeline

import (
	"fmt"
	"reflect"
	"sort"
	"strings"

	"github.com/BurntSushi/toml"
)

// decodeAll decodes a TOML document into st key by key, so that every
// unknown key and every type error is reported (the library stops at the
// first type error). Tables map to struct fields by their toml tags;
// arrays of tables decode entry by entry. It returns the metadata of the
// parse (nil on a syntax error, which is returned as err).
func decodeAll(doc string, st *Study, probs *Problems) (toml.MetaData, error) {
	var raw map[string]toml.Primitive
	md, err := toml.Decode(doc, &raw)
	if err != nil {
		return md, err
	}
	decodeStruct(md, raw, reflect.ValueOf(st).Elem(), "", probs)
	return md, nil
}

func tomlFields(t reflect.Type) map[string]int {
	out := map[string]int{}
	for i := 0; i < t.NumField(); i++ {
		if tag := strings.Split(t.Field(i).Tag.Get("toml"), ",")[0]; tag != "" && tag != "-" {
			out[tag] = i
		}
	}
	return out
}

func decodeStruct(md toml.MetaData, raw map[string]toml.Primitive, v reflect.Value, prefix string, probs *Problems) {
	fields := tomlFields(v.Type())
	keys := make([]string, 0, len(raw))
	for k := range raw {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	for _, k := range keys {
		name := prefix + k
		i, ok := fields[k]
		if !ok {
			probs.add(name, "unknown key")
			continue
		}
		f := v.Field(i)
		switch {
		case f.Kind() == reflect.Struct:
			var sub map[string]toml.Primitive
			if err := md.PrimitiveDecode(raw[k], &sub); err != nil {
				probs.add(name, "must be a table (%s)", typeError(err))
				continue
			}
			decodeStruct(md, sub, f, name+".", probs)
		case f.Kind() == reflect.Slice && f.Type().Elem().Kind() == reflect.Struct:
			var entries []map[string]toml.Primitive
			if err := md.PrimitiveDecode(raw[k], &entries); err != nil {
				probs.add(name, "must be an array of tables (%s)", typeError(err))
				continue
			}
			out := reflect.MakeSlice(f.Type(), len(entries), len(entries))
			for j, e := range entries {
				decodeStruct(md, e, out.Index(j), fmt.Sprintf("%s[%d].", name, j), probs)
			}
			f.Set(out)
		default:
			if err := md.PrimitiveDecode(raw[k], f.Addr().Interface()); err != nil {
				probs.add(name, "%s", typeError(err))
			}
		}
	}
}

// typeError shortens the library's message to what a user needs.
func typeError(err error) string {
	s := err.Error()
	if i := strings.LastIndex(s, ": "); i >= 0 && strings.Contains(s, "incompatible types") {
		return "wrong type: " + s[i+2:]
	}
	if i := strings.Index(s, "): "); strings.HasPrefix(s, "toml: line") && i >= 0 {
		return "wrong type: " + s[i+3:] // from our own UnmarshalTOML
	}
	return s
}
