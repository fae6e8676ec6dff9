package report

import (
	"bytes"
	"encoding/xml"
	"errors"
	"fmt"
	"io"
	"regexp"
	"strings"
)

// urlRef matches url(#id) references in attribute values and styles.
var urlRef = regexp.MustCompile(`url\(\s*#([^)\s]+)\s*\)`)

// cleanSVG returns the SVG document src as markup for inlining in HTML: see
// the package documentation for what is removed and rewritten. prefix is
// put before every id. aria is the accessible label of the root element.
func cleanSVG(src []byte, prefix, aria string) ([]byte, error) {
	d := xml.NewDecoder(bytes.NewReader(src))
	d.Strict = true
	var out bytes.Buffer
	depth, skip := 0, 0 // skip > 0 inside a removed element
	root := false
	for {
		tok, err := d.RawToken()
		if err == io.EOF {
			break
		}
		if err != nil {
			return nil, err
		}
		switch e := tok.(type) {
		case xml.StartElement:
			depth++
			if skip > 0 {
				skip++
				continue
			}
			local := strings.ToLower(e.Name.Local)
			if local == "script" || local == "foreignobject" {
				skip = 1
				continue
			}
			if depth == 1 {
				if local != "svg" {
					return nil, fmt.Errorf("root element is <%s>, want <svg>", e.Name.Local)
				}
				root = true
			}
			out.WriteByte('<')
			out.WriteString(qname(e.Name))
			for _, a := range e.Attr {
				name := qname(a.Name)
				lname := strings.ToLower(a.Name.Local)
				v := a.Value
				switch {
				case strings.HasPrefix(lname, "on"):
					continue
				case lname == "href":
					t := strings.TrimSpace(v)
					if strings.HasPrefix(t, "#") {
						v = "#" + prefix + t[1:]
					} else if !strings.HasPrefix(strings.ToLower(t), "data:image/") {
						continue
					}
				case lname == "id" && a.Name.Space == "":
					v = prefix + v
				case depth == 1 && lname == "aria-label":
					continue
				}
				v = urlRef.ReplaceAllString(v, "url(#"+prefix+"$1)")
				out.WriteByte(' ')
				out.WriteString(name)
				out.WriteString(`="`)
				xml.EscapeText(&out, []byte(v))
				out.WriteByte('"')
			}
			if depth == 1 {
				out.WriteString(` role="img" aria-label="`)
				xml.EscapeText(&out, []byte(aria))
				out.WriteByte('"')
			}
			out.WriteByte('>')
		case xml.EndElement:
			depth--
			if skip > 0 {
				skip--
				continue
			}
			out.WriteString("</")
			out.WriteString(qname(e.Name))
			out.WriteByte('>')
		case xml.CharData:
			if skip > 0 || depth == 0 {
				continue
			}
			xml.EscapeText(&out, e)
		}
		// Comments, processing instructions and directives are dropped.
	}
	if !root {
		return nil, errors.New("no <svg> element")
	}
	if depth != 0 {
		return nil, errors.New("unclosed elements")
	}
	return out.Bytes(), nil
}

func qname(n xml.Name) string {
	if n.Space == "" {
		return n.Local
	}
	return n.Space + ":" + n.Local
}
