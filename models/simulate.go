package models

import (
	"fmt"
	"math"
	"math/rand/v2"
)

// Event is one recorded visible transition.
type Event struct {
	Time  float64 // time since the start of the record
	Label int     // index into Network.Labels
}

// Simulator draws exact trajectories of a Network by the Gillespie direct
// method: in state i the holding time is exponential with rate
// q_i = sum_j w(i->j), and the jump goes to j with probability w(i->j)/q_i.
// A jump carrying label l is recorded with the label's detection
// probability; otherwise it stays hidden. The random stream is PCG
// (math/rand/v2) seeded by the caller, so a seed fixes the output.
//
// # Clock and equal times
//
// The clock is a double-double sum (hi + lo, Knuth's TwoSum): every holding
// time is added without loss however large the clock, and a recorded time
// is the float64 nearest the exact sum of the holding times (within one
// spacing). Two events closer together than the float64 spacing of their
// time (ulp(t), about 2.2e-16 t) then get the same time: the simulator
// keeps both, with equal times, and counts them (Ties). It never drops or
// moves an event because of rounding. A zero gap means only that the true
// gap is below the resolution of the time; statistics of the label
// sequence are unaffected, but an exact-time likelihood cannot give it a
// density (see package likelihood), so a caller should report the count.
// Since float64 spacing is relative, a change of time unit does not remove
// ties; shorter records (times restart at 0 in each record) or
// frame-limited stamps (SetFrame: a clock of stated resolution, over which
// the likelihood integrates) do.
//
// # Bounds
//
// Every loop is bounded: Visible gives up, with an error from Err, after
// MaxJumpsPerEvent jumps without a recorded event, and when the clock or a
// frame index leaves the float64 range; SetDeadTime and Visible refuse up
// front an instrument whose expected number of jumps per recorded event
// exceeds MaxJumpsPerEvent/50 (no event would be recorded in practice).
type Simulator struct {
	rng   *rand.Rand
	out   [][]simJump // per state, the jumps with cumulative probabilities
	exit  []float64   // exit rate q_i
	state int
	time  float64   // clock, high part
	lo    float64   // clock, low part: exact time = time + lo
	pi    []float64 // stationary law, for StartStationary
	dead  float64   // dead time after each detected event
	last  float64   // true time of the last recorded event of the record
	seen  bool      // an event has been recorded in this record
	frame float64   // frame length of the timestamps, 0 for exact times
	stamp float64   // recorded time of the last recorded event
	ties  int       // recorded events whose time equals the previous one
	// jumpRate is sum_i pi_i q_i (jumps per unit time) and detRate the
	// stationary rate of detected events without dead time.
	jumpRate, detRate float64
	err               error
}

// MaxJumpsPerEvent bounds the jumps Visible makes while waiting for one
// recorded event (about 30 s of simulation at 30 ns per jump).
const MaxJumpsPerEvent = 1e9

type simJump struct {
	cum    float64 // cumulative jump probability, last is 1
	to     int
	label  int     // Hidden or label index
	detect float64 // detection probability of the label
}

// NewSimulator validates net and prepares a simulator starting in state 0 at
// time 0; call StartStationary or Reset to choose the start.
func NewSimulator(net *Network, seed uint64) (*Simulator, error) {
	if err := net.Validate(); err != nil {
		return nil, fmt.Errorf("simulate: %w", err)
	}
	k := len(net.States)
	s := &Simulator{
		rng:  rand.New(rand.NewPCG(seed, 0x9e3779b97f4a7c15)),
		out:  make([][]simJump, k),
		exit: make([]float64, k),
	}
	pi, err := net.Stationary()
	if err != nil {
		return nil, fmt.Errorf("simulate: %w", err)
	}
	s.pi = pi
	for _, t := range net.Transitions() {
		s.exit[t.From] += t.Rate
		d := 1.0
		if t.Label != Hidden {
			d = net.Labels[t.Label].Detect
		}
		s.out[t.From] = append(s.out[t.From], simJump{cum: t.Rate, to: t.To, label: t.Label, detect: d})
		if t.Label != Hidden {
			s.detRate += pi[t.From] * t.Rate * d
		}
	}
	for i, q := range s.exit {
		s.jumpRate += pi[i] * q
	}
	for i := range s.out {
		c := 0.0
		for j := range s.out[i] {
			c += s.out[i][j].cum
			s.out[i][j].cum = c / s.exit[i]
		}
		if n := len(s.out[i]); n > 0 {
			s.out[i][n-1].cum = 1
		}
	}
	return s, nil
}

// SetDeadTime sets the instrument's dead time delta >= 0 (time units):
// after each detected event, visible jumps in the following delta are lost
// (the system still makes them): an event is recorded only when its gap
// to the last recorded event, computed in float64 as t - t_last (the
// subtraction the likelihood makes), exceeds delta. Zero, the default,
// means no dead time: no event is ever lost for its timing, even at a gap
// that rounds to 0.
// The dead time does not carry over from one record to the next: Reset and
// StartStationary clear it, so the instrument is ready at the start of a
// record (as the likelihood's stationary start assumes). A dead time in
// which the network makes, on average, more than MaxJumpsPerEvent/50
// jumps is refused: no event would be recorded in practice.
func (s *Simulator) SetDeadTime(delta float64) error {
	if math.IsNaN(delta) || math.IsInf(delta, 0) || delta < 0 {
		return fmt.Errorf("simulate: dead time %v: want a finite value >= 0", delta)
	}
	if j := delta * s.jumpRate; j > MaxJumpsPerEvent/50 {
		return fmt.Errorf("simulate: dead time %v: the network makes about %.3g jumps in that time (%.3g per unit time), more than %g per recorded event: no event would be recorded in practice", delta, j, s.jumpRate, MaxJumpsPerEvent/50)
	}
	s.dead = delta
	return nil
}

// SetFrame makes the recorded timestamps frame-limited: each event is
// stamped with the start of the frame it falls in, floor(t/frame)*frame,
// as on a camera that reads out once per frame. Zero, the default, keeps
// exact times. The dead time runs on the true event times. A frame below
// the smallest normal float64 (2.2e-308) is refused; Visible stops with an
// error when a frame index floor(t/frame) exceeds 2^53, beyond which
// frames are no longer told apart in float64.
func (s *Simulator) SetFrame(frame float64) error {
	if math.IsNaN(frame) || math.IsInf(frame, 0) || frame < 0 {
		return fmt.Errorf("simulate: frame length %v: want a finite value >= 0", frame)
	}
	if frame > 0 && frame < minNormal {
		return fmt.Errorf("simulate: frame length %v is below the smallest normal float64 (%g): times in frames would overflow; choose a larger time unit", frame, minNormal)
	}
	s.frame = frame
	return nil
}

// minNormal is the smallest positive normal float64, 2^-1022.
const minNormal = 0x1p-1022

// Reset puts the simulator in the given state at time t and starts a new
// record (no dead time running, no previous event).
func (s *Simulator) Reset(state int, t float64) {
	s.state, s.time, s.lo = state, t, 0
	s.seen = false
}

// StartStationary draws the state from the stationary law and sets time 0.
func (s *Simulator) StartStationary() {
	pi := s.pi
	u := s.rng.Float64()
	st := len(pi) - 1
	for i, p := range pi {
		if u < p {
			st = i
			break
		}
		u -= p
	}
	s.Reset(st, 0)
}

// State returns the current state and time.
func (s *Simulator) State() (int, float64) { return s.state, s.time }

// Ties returns the number of recorded events, since the simulator was
// made, whose time equals the previous recorded event's time in the same
// record while timestamps are exact (no frame): gaps below the float64
// resolution of the time (see the type's doc).
func (s *Simulator) Ties() int { return s.ties }

// Err returns the error that stopped Visible early, or nil.
func (s *Simulator) Err() error { return s.err }

// step makes one jump and returns it. The holding time is added to the
// double-double clock (time, lo) by TwoSum, so no part of it is lost.
func (s *Simulator) step() *simJump {
	i := s.state
	a, b := s.time, s.rng.ExpFloat64()/s.exit[i]+s.lo
	t := a + b
	bb := t - a
	s.time, s.lo = t, (a-(t-bb))+(b-bb)
	jumps := s.out[i]
	u := s.rng.Float64()
	k := 0
	for k < len(jumps)-1 && u >= jumps[k].cum {
		k++
	}
	j := &jumps[k]
	s.state = j.to
	return j
}

// Steps makes n jumps without recording anything.
func (s *Simulator) Steps(n int) {
	for ; n > 0; n-- {
		s.step()
	}
}

// Visible simulates until n more visible events have been recorded and
// appends them to dst. It also returns the number of jumps made. It stops
// early, with fewer events and an error from Err, when the instrument
// records no event in practice (no visible transition is detected, or more
// than MaxJumpsPerEvent/50 jumps are expected per recorded event), after
// MaxJumpsPerEvent jumps without a recorded event, when the clock
// overflows, or when a frame index exceeds 2^53. After an error it does
// nothing.
func (s *Simulator) Visible(n int, dst []Event) ([]Event, int) {
	if s.err != nil || n <= 0 {
		return dst, 0
	}
	if per := s.jumpRate / s.detRate; !(s.detRate > 0) || per > MaxJumpsPerEvent/50 {
		s.err = fmt.Errorf("simulate: about %.3g jumps per detected event (jump rate %.3g, detected-event rate %.3g per unit time), more than %g: no event would be recorded in practice", per, s.jumpRate, s.detRate, MaxJumpsPerEvent/50)
		return dst, 0
	}
	jumps, since := 0, 0
	for n > 0 {
		j := s.step()
		jumps++
		since++
		if since > MaxJumpsPerEvent {
			s.err = fmt.Errorf("simulate: no event recorded in %g jumps (time %g): giving up", float64(MaxJumpsPerEvent), s.time)
			break
		}
		if math.IsInf(s.time, 0) {
			s.err = fmt.Errorf("simulate: the clock passed the float64 range (%g) after %d events of this call: use a larger time unit or shorter records", math.MaxFloat64, len(dst))
			break
		}
		if j.label == Hidden {
			continue
		}
		if j.detect < 1 && s.rng.Float64() >= j.detect {
			continue
		}
		if s.dead > 0 && s.seen && s.time-s.last <= s.dead {
			continue
		}
		t := s.time
		if s.frame > 0 {
			k := math.Floor(t / s.frame)
			if !(k <= 1<<53) {
				s.err = fmt.Errorf("simulate: time %g is frame number %g of length %g, beyond 2^53: frames are not told apart in float64; use a longer frame or shorter records", t, k, s.frame)
				break
			}
			t = k * s.frame
		} else if s.seen && t == s.stamp {
			s.ties++
		}
		s.last, s.stamp, s.seen = s.time, t, true
		since = 0
		dst = append(dst, Event{Time: t, Label: j.label})
		n--
	}
	return dst, jumps
}
