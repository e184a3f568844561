package model

import (
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"time"

	"tracelift/record"
	"tracelift/record/atomic"
)

// ProjectVersion is the version this build writes and reads.
const ProjectVersion = 1

// ProjectSuffix is appended to the image's file name to name its project
// file: scan.png → scan.png.tracelift.json.
const ProjectSuffix = ".tracelift.json"

// maxProjectBytes bounds what the reader takes in; a project of every
// possible correction by hand stays far below it.
const maxProjectBytes = 32 << 20

// Project is the file kept beside an image: every hand correction and
// setting, so that reopening the image restores the work exactly.
type Project struct {
	Version     int                 `json:"version"`
	Image       string              `json:"image,omitempty"` // base name, for people reading the file
	ImageSHA256 string              `json:"image_sha256"`
	Software    string              `json:"software,omitempty"`
	SavedAt     time.Time           `json:"saved_at,omitzero"`
	Settings    Settings            `json:"settings"`
	Corrections []record.Correction `json:"corrections"`
}

// Errors of the project file.
var (
	ErrProjectVersion  = errors.New("model: project file written by a newer version")
	ErrProjectMismatch = errors.New("model: project file belongs to a different image")
)

// ProjectPath returns the project file's path for an image.
func ProjectPath(image string) string { return image + ProjectSuffix }

// ReadProject decodes and checks a project file.
func ReadProject(r io.Reader) (*Project, error) {
	b, err := io.ReadAll(io.LimitReader(r, maxProjectBytes+1))
	if err != nil {
		return nil, fmt.Errorf("model: reading project: %w", err)
	}
	if len(b) > maxProjectBytes {
		return nil, fmt.Errorf("model: project file larger than %d MiB", maxProjectBytes>>20)
	}
	var head struct {
		Version *int `json:"version"`
	}
	if err := json.Unmarshal(b, &head); err != nil {
		return nil, fmt.Errorf("model: project file is not valid JSON: %w", err)
	}
	if head.Version == nil {
		return nil, errors.New("model: project file has no version")
	}
	if *head.Version > ProjectVersion {
		return nil, fmt.Errorf("%w (version %d; this build reads %d)", ErrProjectVersion, *head.Version, ProjectVersion)
	}
	if *head.Version < 1 {
		return nil, fmt.Errorf("model: project file has a bad version %d", *head.Version)
	}
	var p Project
	if err := json.Unmarshal(b, &p); err != nil {
		return nil, fmt.Errorf("model: project file: %w", err)
	}
	if err := p.check(); err != nil {
		return nil, err
	}
	return &p, nil
}

func (p *Project) check() error {
	if p.ImageSHA256 != "" {
		if _, err := hex.DecodeString(p.ImageSHA256); err != nil || len(p.ImageSHA256) != 64 {
			return fmt.Errorf("model: project file: image_sha256 %q is not a SHA-256 in hex", p.ImageSHA256)
		}
	}
	s := p.Settings
	for _, v := range []float64{s.PxPerMM, s.GainMMPerMV, s.SpeedMMPerS} {
		if math.IsNaN(v) || math.IsInf(v, 0) || v < 0 || v > 1e6 {
			return fmt.Errorf("model: project file: setting %v out of range", v)
		}
	}
	if s.Page < 0 || s.Page > 100000 {
		return fmt.Errorf("model: project file: page %d out of range", s.Page)
	}
	for i := range p.Corrections {
		if err := record.CheckCorrection(&p.Corrections[i]); err != nil {
			return fmt.Errorf("model: project file: correction %d: %w", i+1, err)
		}
	}
	return nil
}

// ReadProjectFile reads the project file at path. A missing file gives
// (nil, nil).
func ReadProjectFile(path string) (*Project, error) {
	f, err := os.Open(path)
	if errors.Is(err, os.ErrNotExist) {
		return nil, nil
	}
	if err != nil {
		return nil, fmt.Errorf("model: %w", err)
	}
	defer f.Close()
	p, err := ReadProject(f)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	return p, nil
}

// WriteProject encodes p.
func WriteProject(w io.Writer, p *Project) error {
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	return enc.Encode(p)
}

// SaveProjectFile writes p to path atomically: a reader or a crash sees the
// old file or the new one, never a part.
func SaveProjectFile(path string, p *Project) error {
	if err := atomic.WriteFile(path, func(w io.Writer) error { return WriteProject(w, p) }, 0o644); err != nil {
		return fmt.Errorf("model: saving project: %w", err)
	}
	return nil
}

// SetAside renames an existing project file out of the way (to
// <name>.tracelift-<time>.json) so that starting afresh never loses the
// corrections it holds. It returns the new name.
func SetAside(path string, now time.Time) (string, error) {
	base := path[:len(path)-len(filepath.Ext(path))]
	dst := fmt.Sprintf("%s-%s.json", base, now.UTC().Format("20060102T150405"))
	if err := os.Rename(path, dst); err != nil {
		return "", fmt.Errorf("model: keeping the old project: %w", err)
	}
	return dst, nil
}

// FileSHA256 returns the hex SHA-256 of a file's bytes.
func FileSHA256(path string) (string, error) {
	f, err := os.Open(path)
	if err != nil {
		return "", fmt.Errorf("model: %w", err)
	}
	defer f.Close()
	h := sha256.New()
	if _, err := io.Copy(h, f); err != nil {
		return "", fmt.Errorf("model: reading %s: %w", path, err)
	}
	return hex.EncodeToString(h.Sum(nil)), nil
}

// Found is what FindProject learned about an image's project file.
type Found struct {
	Path     string
	Project  *Project // nil when there is none (or it could not be read)
	SHA256   string   // of the image
	Mismatch bool     // the project names another image: ask before using it
	Err      error    // the project file exists but is unreadable
}

// FindProject looks for the image's project file and checks it belongs to
// the image. It does not change anything on disk.
func FindProject(image string) Found {
	f := Found{Path: ProjectPath(image)}
	sha, err := FileSHA256(image)
	if err != nil {
		f.Err = err
		return f
	}
	f.SHA256 = sha
	p, err := ReadProjectFile(f.Path)
	if err != nil {
		f.Err = err
		return f
	}
	f.Project = p
	f.Mismatch = p != nil && p.ImageSHA256 != "" && p.ImageSHA256 != sha
	return f
}
