package review

import (
	"encoding/json"
	"errors"
	"fmt"
	"io"
)

// jsonProblem words a decoding error of encoding/json for someone who
// edited the file by hand: where the syntax breaks, which field has the
// wrong type, or that the file ends early.
func jsonProblem(err error) string {
	var se *json.SyntaxError
	var te *json.UnmarshalTypeError
	switch {
	case errors.Is(err, io.ErrUnexpectedEOF) || errors.Is(err, io.EOF):
		return "the file ends before the JSON is complete"
	case errors.As(err, &se):
		return fmt.Sprintf("not valid JSON at byte %d: %v", se.Offset, err)
	case errors.As(err, &te):
		field := te.Field
		if field == "" {
			field = "the top level"
		}
		return fmt.Sprintf("%s holds a JSON %s where %s is expected", field, te.Value, te.Type)
	}
	return err.Error()
}
