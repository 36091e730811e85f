package config

import "time"

// The defaults that ApplyDefaults fills in, documented on each field.
const (
	DefaultListen             = "127.0.0.1:8080"
	DefaultAdmin              = "127.0.0.1:7464"
	DefaultStore              = "riffle.db"
	DefaultQueueSize          = 65536
	DefaultQueueBatch         = 1024
	DefaultQueueInterval      = 50 * time.Millisecond
	DefaultMaxBodyBytes       = 1 << 20
	DefaultOnIncumbentFailure = "fail"
	DefaultShutdownGrace      = 10 * time.Second
	DefaultMaxBackendBytes    = 4 << 20
	DefaultBackendInFlight    = 64 << 20
	DefaultReadHeaderTimeout  = 10 * time.Second
	DefaultReadBodyTimeout    = 10 * time.Second
	DefaultClockSkew          = 30 * time.Second
	DefaultStoreWait          = 5 * time.Second
	DefaultTimeout            = 200 * time.Millisecond
	DefaultPolicy             = "team-draft"
	DefaultTau                = 3.0
	DefaultKeepRequestBytes   = 16384
	DefaultCredit             = "linear"
	DefaultWindow             = 30 * time.Minute
	DefaultAlpha              = 0.05
	DefaultPower              = 0.8
	DefaultMDE                = 0.02
	DefaultGuardWindow        = time.Minute
	DefaultGuardMinRequests   = 100
)

// DefaultEvents returns the default event weights: a purchase counts three
// clicks.
func DefaultEvents() map[string]float64 {
	return map[string]float64{"click": 1, "purchase": 3}
}

// ApplyDefaults fills every zero field that has a documented default.
// Experiment.Ramp is always set afterwards, the start time is put in UTC
// and empty lists become nil. It never writes through a
// reference the config shares with a copy (maps, slices, pointers are
// replaced, not modified), so it is safe on a shallow copy. Parse calls it;
// call it yourself on a Config built in code before Validate.
func (c *Config) ApplyDefaults() {
	setString(&c.Listen, DefaultListen)
	setString(&c.Admin, DefaultAdmin)
	setString(&c.Store, DefaultStore)
	setString(&c.OnIncumbentFailure, DefaultOnIncumbentFailure)
	setInt(&c.Queue.Size, DefaultQueueSize)
	setInt(&c.Queue.Batch, DefaultQueueBatch)
	setDuration(&c.Queue.Interval, DefaultQueueInterval)
	if c.MaxBodyBytes == 0 {
		c.MaxBodyBytes = DefaultMaxBodyBytes
	}
	setDuration(&c.ShutdownGrace, DefaultShutdownGrace)
	setInt64(&c.MaxBackendBytes, DefaultMaxBackendBytes)
	setInt64(&c.BackendBytesInFlight, DefaultBackendInFlight)
	setDuration(&c.ReadHeaderTimeout, DefaultReadHeaderTimeout)
	setDuration(&c.ReadBodyTimeout, DefaultReadBodyTimeout)
	setDuration(&c.Feedback.ClockSkew, DefaultClockSkew)
	setDuration(&c.Feedback.StoreWait, DefaultStoreWait)
	setDuration(&c.Incumbent.Timeout, DefaultTimeout)
	setDuration(&c.Challenger.Timeout, DefaultTimeout)
	if len(c.Routes) == 0 {
		c.Routes = nil // an empty list and none are the same
	}
	c.Experiment.applyDefaults()
}

func (e *Experiment) applyDefaults() {
	setString(&e.Policy, DefaultPolicy)
	setString(&e.Credit, DefaultCredit)
	if e.Tau == 0 {
		e.Tau = DefaultTau
	}
	if len(e.KeepHeaders) == 0 {
		e.KeepHeaders = nil
	}
	if e.KeepRequestBytes == 0 {
		e.KeepRequestBytes = DefaultKeepRequestBytes
	}
	if e.Ramp == nil {
		base := 1.0
		if len(e.Schedule) > 0 {
			base = 0
		}
		e.Ramp = &base
	}
	if !e.Start.IsZero() {
		e.Start = e.Start.UTC()
	}
	if len(e.Schedule) == 0 {
		e.Schedule = nil
	}
	setDuration(&e.Window, DefaultWindow)
	if len(e.Events) == 0 {
		e.Events = DefaultEvents()
	}
	setFloat(&e.Alpha, DefaultAlpha)
	setFloat(&e.Power, DefaultPower)
	setFloat(&e.MDE, DefaultMDE)
	setDuration(&e.Guardrails.Window, DefaultGuardWindow)
	setInt(&e.Guardrails.MinRequests, DefaultGuardMinRequests)
}

func setString(p *string, v string) {
	if *p == "" {
		*p = v
	}
}

func setInt(p *int, v int) {
	if *p == 0 {
		*p = v
	}
}

func setInt64(p *int64, v int64) {
	if *p == 0 {
		*p = v
	}
}

func setFloat(p *float64, v float64) {
	if *p == 0 {
		*p = v
	}
}

func setDuration(p *time.Duration, v time.Duration) {
	if *p == 0 {
		*p = v
	}
}
