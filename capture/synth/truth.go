package synth

import (
	"encoding/json"
	"fmt"
	"math"
	"os"
)

// Truth is the exact geometry of a synthetic clip, written as truth.json.
// Twist, sway and settlement are relative to frame 0, where the tower has
// its nominal shape.
type Truth struct {
	// CaptureFPS is the true capture rate.
	CaptureFPS float64 `json:"capture_fps"`
	// ContainerFPS is the playback rate written into the clip files.
	ContainerFPS float64 `json:"container_fps"`
	// Width and Height are the frame size in pixels.
	Width  int `json:"width"`
	Height int `json:"height"`
	// Frames is the number of frames.
	Frames int `json:"frames"`
	// Seed is the scenario's seed.
	Seed int64 `json:"seed"`
	// Bracing is the bracing pattern.
	Bracing string `json:"bracing"`
	// Camera is the pinhole camera that drew the clip.
	Camera TruthCamera `json:"camera"`
	// Tower is the tower's nominal shape.
	Tower TruthTower `json:"tower"`
	// Points are every named point (joints, brace points, crossings, block
	// stickers) with its image position in every frame.
	Points []TruthPoint `json:"points"`
	// Levels are the per-level twist, sway and settlement, levels 0..n.
	Levels []TruthLevel `json:"levels"`
	// Members are the legs and braces with their chord and bow per frame.
	Members []TruthMember `json:"members"`
	// FirstMember is the member that buckles first ("" for a twist failure).
	FirstMember string `json:"first_member"`
	// OnsetFrame is the first frame where the first member's bow exceeds 0.5 %
	// of its length (for a twist failure: where the twist starts to run away).
	OnsetFrame int `json:"onset_frame"`
	// BreakFrame is the first frame in which the first member is broken
	// (-1 for a twist failure).
	BreakFrame int `json:"break_frame"`
	// CollapseFrame is the first frame of the global collapse.
	CollapseFrame int `json:"collapse_frame"`
	// CollapseFrames is how many frames the collapse takes.
	CollapseFrames int `json:"collapse_frames"`
	// FailureMode is one of tower_twist, leg_full_height, leg_between_braces,
	// brace_buckling, joint_or_base.
	FailureMode string `json:"failure_mode"`
	// FailedPanel is the panel a leg buckled in between braces (1 = between
	// levels 0 and 1); absent for other failures.
	FailedPanel int `json:"failed_panel,omitempty"`
	// FailedJoint is the joint that let go, for a joint failure (the first
	// member is then the member that came off it first).
	FailedJoint string `json:"failed_joint,omitempty"`
	// MassG is the tower's mass in grams.
	MassG float64 `json:"mass_g"`
	// LoadOffsetS is the load log's clock offset: video_time = log_time + load_offset_s.
	LoadOffsetS float64 `json:"load_offset_s"`
	// LoadPeriodS is the logger's nominal sample period.
	LoadPeriodS float64 `json:"load_period_s"`
	// PeakLoadG is the noise-free load at collapse, the peak of the log.
	PeakLoadG float64 `json:"peak_load_g"`
	// LoadAtOnsetG is the noise-free load at the onset frame.
	LoadAtOnsetG float64 `json:"load_at_onset_g"`
	// LoadAtBreakG is the noise-free load at the break frame (0 for a twist failure).
	LoadAtBreakG float64 `json:"load_at_break_g"`
	// Efficiency is the peak load over the tower's mass.
	Efficiency float64 `json:"efficiency"`
	// ShakePX is the camera shake's image shift per frame (already in the
	// points' px); absent when the camera is still.
	ShakePX [][2]float64 `json:"shake_px,omitempty"`
}

// TruthCamera describes the camera: intrinsics and the world-to-camera
// transform as OpenCV's projectPoints takes them (world = tower coordinates
// in mm, no lens distortion).
type TruthCamera struct {
	FocalPX     float64    `json:"focal_px"`
	CX          float64    `json:"cx"`
	CY          float64    `json:"cy"`
	DistanceMM  float64    `json:"distance_mm"`
	HeightMM    float64    `json:"height_mm"`
	AzimuthDeg  float64    `json:"azimuth_deg"`
	PositionMM  [3]float64 `json:"position_mm"`
	Rvec        [3]float64 `json:"rvec"`
	TvecMM      [3]float64 `json:"tvec_mm"`
	RightVector [3]float64 `json:"right"`
	// DistCoeffs are OpenCV's distortion coefficients (k1, k2, p1, p2, k3).
	DistCoeffs [5]float64 `json:"dist_coeffs"`
}

// TruthTower is the nominal tower shape.
type TruthTower struct {
	BaseMM   float64   `json:"base_mm"`
	TopMM    float64   `json:"top_mm"`
	HeightMM float64   `json:"height_mm"`
	LevelsMM []float64 `json:"levels_mm"`
}

// TruthPoint is one named point's image position in every frame.
type TruthPoint struct {
	ID string `json:"id"`
	// Leg is set for points on a leg (joints and mid-panel points), Level
	// for leg joints only.
	Leg   string `json:"leg,omitempty"`
	Level *int   `json:"level,omitempty"`
	// Member is set for points inside a member (mid-spans, quarter points,
	// a leg's mid-panel points).
	Member string `json:"member,omitempty"`
	// Marker is true when a marker sticker is drawn on the point (the faces
	// toward the camera); only those points are in marks.yaml.
	Marker bool `json:"marker"`
	// PX is the position in pixels in every frame (x right, y down),
	// camera shake included.
	PX [][2]float64 `json:"px"`
	// Hidden is true in frames where the swinging cord covers part of the
	// point's dark dot; absent when there is no cord.
	Hidden []bool `json:"hidden,omitempty"`
}

// TruthLevel is one level's motion; all series have one value per frame.
type TruthLevel struct {
	Level int     `json:"level"`
	ZMM   float64 `json:"z_mm"`
	// TwistDeg is the rotation about the vertical axis, counter-clockwise from above positive.
	TwistDeg []float64 `json:"twist_deg"`
	// SwayMM is the level centre's displacement along the camera's horizontal right vector.
	SwayMM []float64 `json:"sway_mm"`
	// SettleMM is the level centre's vertical displacement, positive down.
	SettleMM []float64 `json:"settle_mm"`
}

// TruthMember is one member's shape over time.
type TruthMember struct {
	ID     string   `json:"id"`
	Kind   string   `json:"kind"`
	Points []string `json:"points"`
	// LengthMM is the nominal length between its end points.
	LengthMM float64 `json:"length_mm"`
	// ChordMM is the distance between its end points per frame.
	ChordMM []float64 `json:"chord_mm"`
	// BowMM is the largest distance of its centre line from the chord per frame.
	BowMM []float64 `json:"bow_mm"`
}

// Point returns the truth point with the given id.
func (t *Truth) Point(id string) (*TruthPoint, bool) {
	for i := range t.Points {
		if t.Points[i].ID == id {
			return &t.Points[i], true
		}
	}
	return nil, false
}

// Member returns the truth member with the given id.
func (t *Truth) Member(id string) (*TruthMember, bool) {
	for i := range t.Members {
		if t.Members[i].ID == id {
			return &t.Members[i], true
		}
	}
	return nil, false
}

// LoadTruth reads a truth.json file.
func LoadTruth(path string) (*Truth, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("read truth %s: %w", path, err)
	}
	var t Truth
	if err := json.Unmarshal(data, &t); err != nil {
		return nil, fmt.Errorf("read truth %s: %w", path, err)
	}
	if t.Frames <= 0 || len(t.Points) == 0 {
		return nil, fmt.Errorf("read truth %s: no frames or points", path)
	}
	for _, p := range t.Points {
		if len(p.PX) != t.Frames {
			return nil, fmt.Errorf("read truth %s: point %s has %d positions for %d frames", path, p.ID, len(p.PX), t.Frames)
		}
	}
	return &t, nil
}

func round6(v float64) float64 { return math.Round(v*1e6) / 1e6 }

// cordCovers reports whether the cord at time t covers part of a dot of
// radius r px centred at (x, y) (both without camera shake).
func (m *model) cordCovers(t, x, y, r float64) bool {
	b, tp := m.cordAt(t)
	xb, yb, db := m.cam.project(b)
	xt, yt, _ := m.cam.project(tp)
	hw := m.s.CordMM / 2 * m.cam.f / db
	dx, dy := xt-xb, yt-yb
	l := math.Hypot(dx, dy)
	dist := math.Abs((x-xb)*dy-(y-yb)*dx) / l
	return dist < hw+r
}

// computeTruth evaluates the geometry of every frame.
func (m *model) computeTruth(load *loadModel) *Truth {
	s := m.s
	nf := s.Frames
	t := &Truth{
		CaptureFPS: s.CaptureFPS, ContainerFPS: s.ContainerFPS,
		Width: s.Width, Height: s.Height, Frames: nf, Seed: s.Seed, Bracing: s.Bracing,
		Tower:      TruthTower{BaseMM: s.BaseMM, TopMM: s.TopMM, HeightMM: s.HeightMM, LevelsMM: append([]float64(nil), m.levelsZ...)},
		OnsetFrame: s.OnsetFrame, BreakFrame: s.BreakFrame, CollapseFrame: s.CollapseFrame,
		CollapseFrames: int(m.nCollapse), FailureMode: m.mode, MassG: s.MassG,
		PeakLoadG: s.PeakLoadG, Efficiency: s.PeakLoadG / s.MassG,
	}
	r := m.cam.rows[0]
	t.Camera = TruthCamera{
		FocalPX: m.cam.f, CX: m.cam.cx, CY: m.cam.cy,
		DistanceMM: s.DistanceMM, HeightMM: s.CameraHeightMM, AzimuthDeg: s.AzimuthDeg,
		PositionMM: [3]float64{m.cam.pos.x, m.cam.pos.y, m.cam.pos.z},
		Rvec:       m.cam.rvec(), TvecMM: m.cam.tvec(), RightVector: [3]float64{r.x, r.y, r.z},
		DistCoeffs: [5]float64{m.cam.k1, 0, 0, 0, 0},
	}
	switch {
	case m.fail >= 0:
		t.FirstMember = m.members[m.fail].id
		t.FailedPanel = m.failPanel
	case m.joint >= 0:
		t.FirstMember = m.members[m.jointFirst].id
		t.FailedJoint = m.nodes[m.joint].id
	default:
		t.BreakFrame = -1
	}
	for _, p := range m.points {
		tp := TruthPoint{ID: p.id, Marker: p.marker, PX: make([][2]float64, nf)}
		tp.Leg = p.leg
		if p.level >= 0 {
			lv := p.level
			tp.Level = &lv
		}
		if p.member >= 0 {
			tp.Member = m.members[p.member].id
		}
		t.Points = append(t.Points, tp)
	}
	for k := 0; k <= m.n; k++ {
		t.Levels = append(t.Levels, TruthLevel{Level: k, ZMM: m.levelsZ[k],
			TwistDeg: make([]float64, nf), SwayMM: make([]float64, nf), SettleMM: make([]float64, nf)})
	}
	for _, mb := range m.members {
		t.Members = append(t.Members, TruthMember{ID: mb.id, Kind: mb.kind, Points: mb.pointIDs,
			LengthMM: round6(mb.rest), ChordMM: make([]float64, nf), BowMM: make([]float64, nf)})
	}
	if s.ShakePX > 0 {
		t.ShakePX = make([][2]float64, nf)
	}
	if s.CordMM > 0 {
		for i := range t.Points {
			t.Points[i].Hidden = make([]bool, nf)
		}
	}
	for f := 0; f < nf; f++ {
		ps := m.pose(float64(f))
		dx, dy := m.shake(float64(f))
		if t.ShakePX != nil {
			t.ShakePX[f] = [2]float64{round6(dx), round6(dy)}
		}
		for i := range m.points {
			x, y, d := m.cam.project(m.pointPos(i, ps))
			t.Points[i].PX[f] = [2]float64{round6(x + dx), round6(y + dy)}
			if s.CordMM > 0 {
				t.Points[i].Hidden[f] = m.cordCovers(float64(f), x, y, s.MarkerMM/2*m.cam.f/d)
			}
		}
		for k := 0; k <= m.n; k++ {
			var c, c0 vec3
			for l := 0; l < 4; l++ {
				c = c.add(ps.nodes[jointIndex(m.n, l, k)].scale(0.25))
				c0 = c0.add(m.nodes[jointIndex(m.n, l, k)].rest.scale(0.25))
			}
			var tw float64
			for l := 0; l < 4; l++ {
				p := ps.nodes[jointIndex(m.n, l, k)].sub(c)
				q := m.nodes[jointIndex(m.n, l, k)].rest.sub(c0)
				d := math.Atan2(p.y, p.x) - math.Atan2(q.y, q.x)
				d = math.Remainder(d, 2*math.Pi)
				tw += d / 4
			}
			lv := &t.Levels[k]
			lv.TwistDeg[f] = round6(tw * 180 / math.Pi)
			lv.SwayMM[f] = round6(c.sub(c0).dot(r))
			lv.SettleMM[f] = round6(c0.z - c.z)
		}
		for mi := range m.members {
			lines := m.memberShape(mi, ps)
			first := lines[0][0].p
			last := lines[len(lines)-1][len(lines[len(lines)-1])-1].p
			chord := last.sub(first)
			cl := chord.norm()
			e := chord.scale(1 / cl)
			var bow float64
			for _, l := range lines {
				for _, sp := range l {
					d := sp.p.sub(first)
					perp := d.sub(e.scale(d.dot(e))).norm()
					bow = math.Max(bow, perp)
				}
			}
			t.Members[mi].ChordMM[f] = round6(cl)
			t.Members[mi].BowMM[f] = round6(bow)
		}
	}
	if load != nil {
		t.LoadOffsetS = load.offsetS
		t.LoadPeriodS = load.periodS
		t.LoadAtOnsetG = round6(load.at(float64(s.OnsetFrame) / s.CaptureFPS))
		if m.fail >= 0 || m.joint >= 0 {
			t.LoadAtBreakG = round6(load.at(float64(s.BreakFrame) / s.CaptureFPS))
		}
	}
	return t
}
