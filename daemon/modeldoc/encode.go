package modeldoc

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"time"

	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// Encode validates m exactly as Decode would and writes it as a model
// document: indented UTF-8 JSON ending in a newline, keys in a fixed order,
// arrays of numbers on one line, floats in their shortest exact form.
// The same model always encodes to the same bytes.
//
// m.Name may be "models/{id}" or a bare id; the document stores the id.
// A zero m.Version and a nil m.CreateTime are left out of the document, as
// is a nil m.Report.
func Encode(m *mixdv1.Model) ([]byte, error) {
	b, err := encode(m)
	if err != nil {
		return nil, fmt.Errorf("encode model document: %w", err)
	}
	return b, nil
}

func encode(m *mixdv1.Model) ([]byte, error) {
	if m == nil {
		return nil, errors.New("model is nil")
	}
	d, err := fromModel(m)
	if err != nil {
		return nil, err
	}
	if _, err := d.toModel(); err != nil {
		return nil, err
	}
	var buf bytes.Buffer
	enc := json.NewEncoder(&buf)
	enc.SetEscapeHTML(false)
	if err := enc.Encode(d); err != nil {
		return nil, err
	}
	return layout(bytes.TrimSuffix(buf.Bytes(), []byte("\n"))), nil
}

// fromModel converts m into the document shape without judging it, except
// where the shape cannot be built (a covariance whose length is not the
// dimension squared cannot be cut into rows).
func fromModel(m *mixdv1.Model) (*document, error) {
	p := m.GetParameters()
	if p == nil {
		return nil, errors.New("parameters: missing")
	}
	id, err := ParseName(m.Name)
	if err != nil {
		return nil, fmt.Errorf("name: %w", err)
	}
	d := &document{
		Format:        Format,
		FormatVersion: FormatVersion,
		Name:          id,
		Version:       m.Version,
		Dimension:     int64(p.Dimension),
		FeatureNames:  append([]string{}, p.FeatureNames...),
	}
	if m.CreateTime != nil {
		if err := m.CreateTime.CheckValid(); err != nil {
			return nil, fmt.Errorf("created: %w", err)
		}
		d.Created = m.CreateTime.AsTime().UTC().Format(time.RFC3339Nano)
	}
	switch p.Family {
	case mixdv1.Family_FAMILY_GAUSSIAN:
		d.Family = "gaussian"
	case mixdv1.Family_FAMILY_STUDENT_T:
		d.Family = "student_t"
	default:
		return nil, fmt.Errorf("family: %v is not a family a document can hold", p.Family)
	}
	switch p.CovarianceStructure {
	case mixdv1.CovarianceStructure_COVARIANCE_STRUCTURE_FULL:
		d.CovarianceStructure = "full"
	case mixdv1.CovarianceStructure_COVARIANCE_STRUCTURE_DIAGONAL:
		d.CovarianceStructure = "diagonal"
	case mixdv1.CovarianceStructure_COVARIANCE_STRUCTURE_SPHERICAL:
		d.CovarianceStructure = "spherical"
	case mixdv1.CovarianceStructure_COVARIANCE_STRUCTURE_TIED:
		d.CovarianceStructure = "tied"
	default:
		return nil, fmt.Errorf("covariance_structure: %v is not a structure a document can hold", p.CovarianceStructure)
	}
	dim := int(p.Dimension)
	d.Components = make([]component, len(p.Components))
	for k, c := range p.Components {
		if c == nil {
			return nil, fmt.Errorf("components[%d]: missing", k)
		}
		w := c.Weight
		dc := component{
			Weight:           &w,
			Mean:             append([]float64{}, c.Mean...),
			DegreesOfFreedom: c.DegreesOfFreedom,
		}
		if dim >= 1 {
			if len(c.Covariance) != dim*dim {
				return nil, fmt.Errorf("components[%d].covariance: has %d values, want %d (the dimension squared)", k, len(c.Covariance), dim*dim)
			}
			dc.Covariance = make([][]float64, dim)
			for i := range dim {
				dc.Covariance[i] = append([]float64{}, c.Covariance[i*dim:(i+1)*dim]...)
			}
		}
		d.Components[k] = dc
	}
	if r := m.Report; r != nil {
		fr := &fitReport{
			Fitter:        r.Fitter,
			FitterVersion: r.FitterVersion,
			Settings:      map[string]string{},
			Seed:          r.Seed,
			Iterations:    r.Iterations,
			Converged:     r.Converged,
			Objective:     r.Objective,
			LogLikelihood: r.LogLikelihood,
			Bound:         r.Bound,
			BIC:           r.Bic,
			AIC:           r.Aic,
			TrainingRows:  r.TrainingRows,
			History:       append([]float64{}, r.History...),
			Selection:     []selectionRow{},
			FlaggedRows:   r.FlaggedRows,
			Notes:         append([]string{}, r.Notes...),

			OutlierLevel:        r.OutlierLevel,
			EffectiveComponents: r.EffectiveComponents,
		}
		for k, v := range r.Settings {
			fr.Settings[k] = v
		}
		if r.Elapsed != nil {
			s, err := formatSeconds(r.Elapsed)
			if err != nil {
				return nil, fmt.Errorf("fit_report.elapsed_seconds: %w", err)
			}
			fr.ElapsedSeconds = json.Number(s)
		}
		for i, s := range r.Selection {
			if s == nil {
				return nil, fmt.Errorf("fit_report.selection[%d]: missing", i)
			}
			fr.Selection = append(fr.Selection, selectionRow{
				Components: s.Components, LogLikelihood: s.LogLikelihood, BIC: s.Bic, AIC: s.Aic,
				Converged: s.Converged, Iterations: s.Iterations,
			})
		}
		if q := r.TrainingQuantiles; q != nil {
			fr.TrainingQuantiles = &quantiles{
				Levels:       append([]float64{}, q.Levels...),
				LogDensities: append([]float64{}, q.LogDensities...),
			}
		}
		d.FitReport = fr
	}
	return d, nil
}

// layout re-indents compact JSON: objects and arrays of arrays or objects
// get one member per line, indented by two spaces; arrays whose elements
// are all scalars stay on one line with ", " between elements. Number and
// string tokens are copied byte for byte.
func layout(src []byte) []byte {
	p := printer{src: src}
	p.value(0)
	p.out.WriteByte('\n')
	return p.out.Bytes()
}

type printer struct {
	src []byte
	pos int
	out bytes.Buffer
}

func (p *printer) newline(depth int) {
	p.out.WriteByte('\n')
	for range depth {
		p.out.WriteString("  ")
	}
}

// value copies one JSON value starting at p.pos.
func (p *printer) value(depth int) {
	if p.pos >= len(p.src) {
		return
	}
	switch p.src[p.pos] {
	case '{':
		p.pos++
		if p.pos < len(p.src) && p.src[p.pos] == '}' {
			p.pos++
			p.out.WriteString("{}")
			return
		}
		p.out.WriteByte('{')
		for p.pos < len(p.src) {
			p.newline(depth + 1)
			p.str()
			p.pos++ // ':'
			p.out.WriteString(": ")
			p.value(depth + 1)
			if p.pos < len(p.src) && p.src[p.pos] == ',' {
				p.pos++
				p.out.WriteByte(',')
				continue
			}
			break
		}
		p.pos++ // '}'
		p.newline(depth)
		p.out.WriteByte('}')
	case '[':
		p.pos++
		if p.pos < len(p.src) && p.src[p.pos] == ']' {
			p.pos++
			p.out.WriteString("[]")
			return
		}
		flat := p.flatArray()
		p.out.WriteByte('[')
		first := true
		for p.pos < len(p.src) {
			switch {
			case !flat:
				p.newline(depth + 1)
			case !first:
				p.out.WriteByte(' ')
			}
			first = false
			p.value(depth + 1)
			if p.pos < len(p.src) && p.src[p.pos] == ',' {
				p.pos++
				p.out.WriteByte(',')
				continue
			}
			break
		}
		p.pos++ // ']'
		if !flat {
			p.newline(depth)
		}
		p.out.WriteByte(']')
	case '"':
		p.str()
	default:
		start := p.pos
		for p.pos < len(p.src) {
			c := p.src[p.pos]
			if c == ',' || c == ']' || c == '}' {
				break
			}
			p.pos++
		}
		p.out.Write(p.src[start:p.pos])
	}
}

// str copies a string token, escapes included.
func (p *printer) str() {
	start := p.pos
	p.pos++ // opening quote
	for p.pos < len(p.src) {
		c := p.src[p.pos]
		p.pos++
		if c == '\\' {
			p.pos++
			continue
		}
		if c == '"' {
			break
		}
	}
	p.out.Write(p.src[start:p.pos])
}

// flatArray reports whether the array whose first element starts at p.pos
// holds only scalars at its top level.
func (p *printer) flatArray() bool {
	inString := false
	for i := p.pos; i < len(p.src); i++ {
		c := p.src[i]
		if inString {
			if c == '\\' {
				i++
			} else if c == '"' {
				inString = false
			}
			continue
		}
		switch c {
		case '"':
			inString = true
		case '[', '{':
			return false
		case ']':
			return true
		}
	}
	return true
}
