package daemon

import (
	"bytes"
	"context"
	"encoding/base64"
	"fmt"
	"html/template"
	"log/slog"
	"net/http"
	"strings"
	"time"

	"github.com/mixd-dev/mixd/fitters/mixture/picture"
	"github.com/mixd-dev/mixd/fitters/pbconv"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// The status page (mixd serve --status-page) is a read-only HTML overview
// served at /status on the metrics listener (--metrics-listen): the stored
// models with their dimension, components, family, newest version and
// whether they are in the model cache; the fit jobs queued and running with
// their progress; recent failed fits; and, for each model, a picture of the
// component ellipses and the log-density over two features. It is plain
// server-rendered HTML with inline SVG: no scripts and nothing fetched from
// elsewhere. It refreshes itself every StatusRefreshSeconds through a
// <meta http-equiv="refresh"> element.
//
// Query parameters: model=ID shows only that model; x=FEATURE and
// y=FEATURE choose the two features of the pictures (names or 1-based
// numbers; models that lack them fall back to their first two features).
//
// When the daemon uses tokens (--token-file), the page needs a token of
// class read or full in the Authorization header, either "Bearer TOKEN" or
// HTTP Basic with the token as the password (any user name), which lets a
// browser ask for it. A token in the URL is not accepted: URLs end up in
// logs and browser history. Without TLS on the metrics listener the token
// travels in plain text, so keep that listener on loopback or a trusted
// network.

// StatusPath is the path of the status page on the metrics listener.
const StatusPath = "/status"

// StatusRefreshSeconds is how often the status page reloads itself.
const StatusRefreshSeconds = 5

// statusMaxModels bounds the models listed; statusMaxPictures the pictures
// drawn per page view.
const (
	statusMaxModels   = 100
	statusMaxPictures = 12
)

// statusPage serves the status page of a Server.
type statusPage struct {
	s    *Server
	auth *authenticator // nil: no tokens
	log  *slog.Logger
	tmpl *template.Template
}

func newStatusPage(s *Server, auth *authenticator, log *slog.Logger) *statusPage {
	return &statusPage{s: s, auth: auth, log: log, tmpl: template.Must(template.New("status").Parse(statusTemplate))}
}

// holds reports whether the cache holds version of model name.
func (c *modelCache) holds(name string, version int64) bool {
	c.mu.Lock()
	defer c.mu.Unlock()
	_, ok := c.items[cacheKey{name, version}]
	return ok
}

// authorized checks the request's token when tokens are on; it writes the
// refusal and returns false when the request may not see the page.
func (p *statusPage) authorized(w http.ResponseWriter, r *http.Request) bool {
	if p.auth == nil {
		return true
	}
	tok := ""
	h := strings.TrimSpace(r.Header.Get("Authorization"))
	scheme, rest, _ := strings.Cut(h, " ")
	switch {
	case strings.EqualFold(scheme, "bearer"):
		tok = strings.TrimSpace(rest)
	case strings.EqualFold(scheme, "basic"):
		if raw, err := base64.StdEncoding.DecodeString(strings.TrimSpace(rest)); err == nil {
			_, tok, _ = strings.Cut(string(raw), ":")
		}
	}
	if tok != "" {
		if e, ok := p.auth.tokens.Load().lookup(tok); ok && e.class >= ClassRead {
			return true
		}
	}
	w.Header().Set("WWW-Authenticate", `Basic realm="mixd status", charset="UTF-8"`)
	http.Error(w, "this page needs a mixd token (read or full): send \"Authorization: Bearer TOKEN\", or give the token as the password", http.StatusUnauthorized)
	return false
}

// Page data.
type (
	statusModel struct {
		Name, Family, Structure, Cache, Features, Created string
		Version                                           int64
		Dim, K                                            int
		Picture                                           template.HTML
		PictureNote                                       string
	}
	statusJob struct {
		Name, Model, Fitter, State, Progress, Created, Error string
		Rows                                                 int64
	}
	statusData struct {
		Now, Filter, ModelsNote string
		Refresh                 int
		Models                  []statusModel
		Active, Failed          []statusJob
	}
)

func (p *statusPage) ServeHTTP(w http.ResponseWriter, r *http.Request) {
	if r.Method != http.MethodGet && r.Method != http.MethodHead {
		w.Header().Set("Allow", "GET, HEAD")
		http.Error(w, "the status page is read-only: use GET", http.StatusMethodNotAllowed)
		return
	}
	if !p.authorized(w, r) {
		return
	}
	ctx, cancel := context.WithTimeout(r.Context(), 20*time.Second)
	defer cancel()
	q := r.URL.Query()
	d := statusData{Now: time.Now().UTC().Format(time.RFC3339), Refresh: StatusRefreshSeconds, Filter: q.Get("model")}
	d.Models, d.ModelsNote = p.models(ctx, d.Filter, q.Get("x"), q.Get("y"))
	jobs, _, err := p.s.jobs.list(int32(p.s.limits.JobHistory+p.s.limits.MaxActiveJobs+1), "")
	if err != nil {
		jobs, _, _ = p.s.jobs.list(0, "")
	}
	for _, j := range jobs {
		sj := statusJob{
			Name: strings.TrimPrefix(j.GetName(), "fitJobs/"), Model: strings.TrimPrefix(j.GetModel(), "models/"),
			Fitter: j.GetFitter(), State: stateLabel(j.GetState()), Rows: j.GetRows(),
			Created: j.GetCreateTime().AsTime().UTC().Format(time.RFC3339), Error: j.GetErrorMessage(),
		}
		if pr := j.GetProgress(); pr != nil {
			sj.Progress = fmt.Sprintf("K=%d, start %d, iteration %d, objective %.6g, %s", pr.GetComponents(), pr.GetRestart(),
				pr.GetIteration(), pr.GetObjective(), pr.GetElapsed().AsDuration().Round(time.Millisecond))
		}
		switch j.GetState() {
		case mixdv1.FitJobState_FIT_JOB_STATE_RECEIVING, mixdv1.FitJobState_FIT_JOB_STATE_QUEUED, mixdv1.FitJobState_FIT_JOB_STATE_RUNNING:
			d.Active = append(d.Active, sj)
		case mixdv1.FitJobState_FIT_JOB_STATE_FAILED:
			d.Failed = append(d.Failed, sj)
		}
	}
	var buf bytes.Buffer
	if err := p.tmpl.Execute(&buf, d); err != nil {
		p.log.Error("status page", "error", err)
		http.Error(w, "status page: "+err.Error(), http.StatusInternalServerError)
		return
	}
	w.Header().Set("Content-Type", "text/html; charset=utf-8")
	w.Header().Set("Cache-Control", "no-store")
	// Nothing on the page may be fetched or run: inline styles and images only.
	w.Header().Set("Content-Security-Policy", "default-src 'none'; style-src 'unsafe-inline'; img-src data:")
	w.Header().Set("X-Content-Type-Options", "nosniff")
	_, _ = w.Write(buf.Bytes())
}

// models lists the stored models (newest version of each) and draws up to
// statusMaxPictures pictures.
func (p *statusPage) models(ctx context.Context, filter, x, y string) ([]statusModel, string) {
	ms, next, err := p.s.store.List(ctx, statusMaxModels, "")
	if err != nil {
		return nil, "the model store could not be listed: " + err.Error()
	}
	note := ""
	if next != "" {
		note = fmt.Sprintf("Only the first %d models are listed.", statusMaxModels)
	}
	var out []statusModel
	pictures := 0
	for _, m := range ms {
		id := strings.TrimPrefix(m.GetName(), "models/")
		if filter != "" && filter != id {
			continue
		}
		pp := m.GetParameters()
		sm := statusModel{
			Name: id, Version: m.GetVersion(), Dim: int(pp.GetDimension()), K: len(pp.GetComponents()),
			Family:    strings.ToLower(strings.TrimPrefix(pp.GetFamily().String(), "FAMILY_")),
			Structure: strings.ToLower(strings.TrimPrefix(pp.GetCovarianceStructure().String(), "COVARIANCE_STRUCTURE_")),
			Features:  strings.Join(pp.GetFeatureNames(), ", "),
			Created:   m.GetCreateTime().AsTime().UTC().Format(time.RFC3339),
			Cache:     "stored only",
		}
		if p.s.cache.holds(m.GetName(), m.GetVersion()) {
			sm.Cache = "in memory"
		}
		switch {
		case sm.Dim < 2:
			sm.PictureNote = "one feature: no two-feature picture"
		case pictures >= statusMaxPictures:
			sm.PictureNote = fmt.Sprintf("pictures are drawn for the first %d models; add ?model=%s to see this one", statusMaxPictures, id)
		default:
			pictures++
			svg, err := statusPicture(m, x, y)
			if err != nil {
				sm.PictureNote = err.Error()
			} else {
				sm.Picture = svg
			}
		}
		out = append(out, sm)
	}
	if filter != "" && len(out) == 0 {
		note = fmt.Sprintf("No stored model is named %q.", filter)
	}
	return out, note
}

// statusPicture draws m over features x and y (falling back to the first
// two) as an inline SVG element.
func statusPicture(m *mixdv1.Model, x, y string) (template.HTML, error) {
	params, err := pbconv.ParamsFromProto(m.GetParameters())
	if err != nil {
		return "", fmt.Errorf("no picture: %w", err)
	}
	xi, yi := 0, 1
	if x != "" && y != "" {
		a, errA := picture.FeatureIndex(params, x)
		b, errB := picture.FeatureIndex(params, y)
		if errA == nil && errB == nil && a != b {
			xi, yi = a, b
		}
	}
	id := strings.TrimPrefix(m.GetName(), "models/")
	pl, err := picture.Scatter(picture.View{
		Params: params, X: xi, Y: yi, GridSize: 64,
		Title: fmt.Sprintf("%s version %d: %s against %s", id, m.GetVersion(), picture.FeatureName(params, yi), picture.FeatureName(params, xi)),
	})
	if err != nil {
		return "", fmt.Errorf("no picture: %w", err)
	}
	var buf bytes.Buffer
	if err := picture.Render(&buf, pl, picture.SVG, 640, 480); err != nil {
		return "", fmt.Errorf("no picture: %w", err)
	}
	return inlineSVG(buf.Bytes()), nil
}

// inlineSVG strips the XML declaration and comments before the <svg>
// element so the document can sit inside HTML. The text in it was escaped
// by the SVG writer (feature and model names are user input).
func inlineSVG(b []byte) template.HTML {
	if i := bytes.Index(b, []byte("<svg")); i >= 0 {
		b = b[i:]
	}
	return template.HTML(b)
}

const statusTemplate = `<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta http-equiv="refresh" content="{{.Refresh}}">
<title>mixd status</title>
<style>
body { font-family: sans-serif; margin: 1.5em; color: #222; }
table { border-collapse: collapse; margin-bottom: 1.5em; }
th, td { border: 1px solid #bbb; padding: 0.25em 0.6em; text-align: left; vertical-align: top; }
th { background: #eee; }
.note { color: #555; }
.model { display: inline-block; margin: 0 1em 1em 0; vertical-align: top; }
svg { max-width: 100%; height: auto; }
</style>
</head>
<body>
<h1>mixd status</h1>
<p class="note">Read-only view at {{.Now}}; it reloads every {{.Refresh}} s.{{if .Filter}} Showing model {{.Filter}} only.{{end}}</p>

<h2>Fits waiting or running</h2>
{{if .Active}}<table>
<tr><th>job</th><th>model</th><th>fitter</th><th>state</th><th>rows</th><th>progress</th><th>created (UTC)</th></tr>
{{range .Active}}<tr><td>{{.Name}}</td><td>{{.Model}}</td><td>{{.Fitter}}</td><td>{{.State}}</td><td>{{.Rows}}</td><td>{{.Progress}}</td><td>{{.Created}}</td></tr>
{{end}}</table>{{else}}<p class="note">No fit is waiting or running.</p>{{end}}

<h2>Recent failed fits</h2>
{{if .Failed}}<table>
<tr><th>job</th><th>model</th><th>fitter</th><th>created (UTC)</th><th>error</th></tr>
{{range .Failed}}<tr><td>{{.Name}}</td><td>{{.Model}}</td><td>{{.Fitter}}</td><td>{{.Created}}</td><td>{{.Error}}</td></tr>
{{end}}</table>{{else}}<p class="note">No failed fit among the jobs this daemon remembers.</p>{{end}}

<h2>Models</h2>
{{with .ModelsNote}}<p class="note">{{.}}</p>{{end}}
{{if .Models}}<table>
<tr><th>model</th><th>version</th><th>features</th><th>components</th><th>family</th><th>structure</th><th>cache</th><th>written (UTC)</th></tr>
{{range .Models}}<tr><td>{{.Name}}</td><td>{{.Version}}</td><td>{{.Dim}}{{with .Features}}: {{.}}{{end}}</td><td>{{.K}}</td><td>{{.Family}}</td><td>{{.Structure}}</td><td>{{.Cache}}</td><td>{{.Created}}</td></tr>
{{end}}</table>
<p class="note">Pictures: each component's 1-, 2- and 3-sigma ellipses of its marginal over two features (the scale matrix for Student-t models) over the shaded marginal log-density. Choose the features with ?x=NAME&amp;y=NAME. The daemon keeps no training rows, so no points are drawn.</p>
{{range .Models}}<div class="model">{{if .Picture}}{{.Picture}}{{else}}<p class="note">{{.Name}}: {{.PictureNote}}</p>{{end}}</div>
{{end}}{{else}}<p class="note">No model is stored.</p>{{end}}
</body>
</html>
`
