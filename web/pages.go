package web

import (
	"net/http"
	"strconv"
)

func statusText(code int) string {
	if t := http.StatusText(code); t != "" {
		return t
	}
	return "Error " + strconv.Itoa(code)
}
