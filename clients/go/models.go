package mixdclient

import (
	"context"
	"fmt"

	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// GetModel returns one version of a model; version 0 means the newest.
// name is "models/{id}" or just "{id}".
func (c *Client) GetModel(ctx context.Context, name string, version int64) (*mixdv1.Model, error) {
	ctx, cancel := c.unaryContext(ctx)
	defer cancel()
	resp, err := c.svc.GetModel(ctx, &mixdv1.GetModelRequest{Name: name, Version: version})
	if err != nil {
		return nil, fmt.Errorf("mixdclient: get model %s: %w", name, err)
	}
	return resp.GetModel(), nil
}

// ListModels returns the newest version of every model, by name, following
// pages.
func (c *Client) ListModels(ctx context.Context) ([]*mixdv1.Model, error) {
	ctx, cancel := c.unaryContext(ctx)
	defer cancel()
	var out []*mixdv1.Model
	token := ""
	for {
		resp, err := c.svc.ListModels(ctx, &mixdv1.ListModelsRequest{PageToken: token})
		if err != nil {
			return nil, fmt.Errorf("mixdclient: list models: %w", err)
		}
		out = append(out, resp.GetModels()...)
		if token = resp.GetNextPageToken(); token == "" {
			return out, nil
		}
	}
}

// ListVersions returns every version of one model, oldest first.
func (c *Client) ListVersions(ctx context.Context, name string) ([]*mixdv1.Model, error) {
	ctx, cancel := c.unaryContext(ctx)
	defer cancel()
	var out []*mixdv1.Model
	token := ""
	for {
		resp, err := c.svc.ListModelVersions(ctx, &mixdv1.ListModelVersionsRequest{Name: name, PageToken: token})
		if err != nil {
			return nil, fmt.Errorf("mixdclient: list versions of %s: %w", name, err)
		}
		out = append(out, resp.GetModels()...)
		if token = resp.GetNextPageToken(); token == "" {
			return out, nil
		}
	}
}

// DeleteModel deletes one version of a model, or every version when version
// is 0, and returns how many versions were deleted.
func (c *Client) DeleteModel(ctx context.Context, name string, version int64) (int64, error) {
	ctx, cancel := c.unaryContext(ctx)
	defer cancel()
	resp, err := c.svc.DeleteModel(ctx, &mixdv1.DeleteModelRequest{Name: name, Version: version})
	if err != nil {
		return 0, fmt.Errorf("mixdclient: delete model %s: %w", name, err)
	}
	return resp.GetDeletedVersions(), nil
}

// ExportModel returns a model version as a model document (UTF-8 JSON).
func (c *Client) ExportModel(ctx context.Context, name string, version int64) ([]byte, error) {
	ctx, cancel := c.unaryContext(ctx)
	defer cancel()
	resp, err := c.svc.ExportModel(ctx, &mixdv1.ExportModelRequest{Name: name, Version: version})
	if err != nil {
		return nil, fmt.Errorf("mixdclient: export model %s: %w", name, err)
	}
	return resp.GetDocument(), nil
}

// ImportModel stores a model document as a new version, under name when it
// is not empty and under the document's own model id otherwise.
func (c *Client) ImportModel(ctx context.Context, document []byte, name string) (*mixdv1.Model, error) {
	ctx, cancel := c.unaryContext(ctx)
	defer cancel()
	resp, err := c.svc.ImportModel(ctx, &mixdv1.ImportModelRequest{Document: document, Name: name})
	if err != nil {
		return nil, fmt.Errorf("mixdclient: import model: %w", err)
	}
	return resp.GetModel(), nil
}

// ListFitters returns the fitters the daemon can run, by name.
func (c *Client) ListFitters(ctx context.Context) ([]*mixdv1.FitterInfo, error) {
	ctx, cancel := c.unaryContext(ctx)
	defer cancel()
	resp, err := c.svc.ListFitters(ctx, &mixdv1.ListFittersRequest{})
	if err != nil {
		return nil, fmt.Errorf("mixdclient: list fitters: %w", err)
	}
	return resp.GetFitters(), nil
}

// ReloadFitters asks the daemon to rescan its plugin directory. It returns
// the fitters afterwards and the executables that could not be loaded.
func (c *Client) ReloadFitters(ctx context.Context) ([]*mixdv1.FitterInfo, []string, error) {
	ctx, cancel := c.unaryContext(ctx)
	defer cancel()
	resp, err := c.svc.ReloadFitters(ctx, &mixdv1.ReloadFittersRequest{})
	if err != nil {
		return nil, nil, fmt.Errorf("mixdclient: reload fitters: %w", err)
	}
	return resp.GetFitters(), resp.GetProblems(), nil
}
