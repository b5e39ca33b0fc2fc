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
type Simulator struct {
	rng   *rand.Rand
	out   [][]simJump // per state, the jumps with cumulative probabilities
	exit  []float64   // exit rate q_i
	state int
	time  float64
	pi    []float64 // stationary law, for StartStationary
	dead  float64   // dead time after each detected event
	blind float64   // events at times <= blind are lost
	frame float64   // frame length of the timestamps, 0 for exact times
}

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
		rng:   rand.New(rand.NewPCG(seed, 0x9e3779b97f4a7c15)),
		out:   make([][]simJump, k),
		exit:  make([]float64, k),
		blind: math.Inf(-1),
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
// (the system still makes them). Zero, the default, means no dead time.
// The dead time does not carry over from one record to the next: Reset and
// StartStationary clear it, so the instrument is ready at the start of a
// record (as the likelihood's stationary start assumes).
func (s *Simulator) SetDeadTime(delta float64) error {
	if math.IsNaN(delta) || math.IsInf(delta, 0) || delta < 0 {
		return fmt.Errorf("simulate: dead time %v: want a finite value >= 0", delta)
	}
	s.dead = delta
	return nil
}

// SetFrame makes the recorded timestamps frame-limited: each event is
// stamped with the start of the frame it falls in, floor(t/frame)*frame,
// as on a camera that reads out once per frame. Zero, the default, keeps
// exact times. The dead time runs on the true event times.
func (s *Simulator) SetFrame(frame float64) error {
	if math.IsNaN(frame) || math.IsInf(frame, 0) || frame < 0 {
		return fmt.Errorf("simulate: frame length %v: want a finite value >= 0", frame)
	}
	s.frame = frame
	return nil
}

// Reset puts the simulator in the given state at time t.
func (s *Simulator) Reset(state int, t float64) {
	s.state, s.time = state, t
	s.blind = math.Inf(-1)
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

// step makes one jump and returns it.
func (s *Simulator) step() *simJump {
	i := s.state
	s.time += s.rng.ExpFloat64() / s.exit[i]
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
// appends them to dst. It also returns the number of jumps made.
func (s *Simulator) Visible(n int, dst []Event) ([]Event, int) {
	jumps := 0
	for n > 0 {
		j := s.step()
		jumps++
		if j.label == Hidden {
			continue
		}
		if j.detect < 1 && s.rng.Float64() >= j.detect {
			continue
		}
		if s.time <= s.blind {
			continue
		}
		s.blind = s.time + s.dead
		t := s.time
		if s.frame > 0 {
			t = math.Floor(t/s.frame) * s.frame
		}
		dst = append(dst, Event{Time: t, Label: j.label})
		n--
	}
	return dst, jumps
}
