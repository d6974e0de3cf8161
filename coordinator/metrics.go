package coordinator

import (
	"github.com/prometheus/client_golang/prometheus"
)

// Collector exports the coordinator's state as Prometheus metrics: tasks by state,
// completions, lease expiries, duplicates, rejected results and split replicates whose
// parts did not assemble. It reads the state at scrape time, so nothing on the hot path
// pays for it.
func (c *Coordinator) Collector() prometheus.Collector { return collector{c} }

type collector struct{ c *Coordinator }

var (
	descTasks       = prometheus.NewDesc("bbmx_tasks", "Tasks of the sweep by state.", []string{"state"}, nil)
	descCompletions = prometheus.NewDesc("bbmx_task_completions_total", "Task results accepted and committed.", nil, nil)
	descExpiries    = prometheus.NewDesc("bbmx_lease_expiries_total", "Leases that expired without a result.", nil, nil)
	descDuplicates  = prometheus.NewDesc("bbmx_duplicate_results_total", "Results for tasks already done (compared and dropped).", nil, nil)
	descRejected    = prometheus.NewDesc("bbmx_rejected_results_total", "Results that failed validation.", nil, nil)
	descAssembly    = prometheus.NewDesc("bbmx_replicate_assembly_failures_total", "Split replicates whose parts did not assemble; every part was dropped and queued again (parked after MaxFailures).", nil, nil)
	descCompute     = prometheus.NewDesc("bbmx_compute_seconds_total", "Simulation time reported by workers for accepted results.", nil, nil)
	descWorkers     = prometheus.NewDesc("bbmx_workers", "Workers seen within two lease lengths.", nil, nil)
)

func (m collector) Describe(ch chan<- *prometheus.Desc) {
	for _, d := range []*prometheus.Desc{descTasks, descCompletions, descExpiries, descDuplicates, descRejected, descAssembly, descCompute, descWorkers} {
		ch <- d
	}
}

func (m collector) Collect(ch chan<- prometheus.Metric) {
	st := m.c.StatusNow()
	var pending, leased, done, parked uint64
	for _, cs := range st.Cells {
		done += cs.TasksDone
		leased += cs.TasksLeased
		parked += cs.TasksParked
		pending += cs.TasksTotal - cs.TasksDone - cs.TasksLeased - cs.TasksParked
	}
	for state, n := range map[string]uint64{"pending": pending, "leased": leased, "done": done, "parked": parked} {
		ch <- prometheus.MustNewConstMetric(descTasks, prometheus.GaugeValue, float64(n), state)
	}
	m.c.mu.Lock()
	s := m.c.stats
	m.c.mu.Unlock()
	ch <- prometheus.MustNewConstMetric(descCompletions, prometheus.CounterValue, float64(s.completions))
	ch <- prometheus.MustNewConstMetric(descExpiries, prometheus.CounterValue, float64(s.expiries))
	ch <- prometheus.MustNewConstMetric(descDuplicates, prometheus.CounterValue, float64(s.duplicates))
	ch <- prometheus.MustNewConstMetric(descRejected, prometheus.CounterValue, float64(s.rejected))
	ch <- prometheus.MustNewConstMetric(descAssembly, prometheus.CounterValue, float64(s.assemblyFailures))
	ch <- prometheus.MustNewConstMetric(descCompute, prometheus.CounterValue, float64(s.computeNS)/1e9)
	ch <- prometheus.MustNewConstMetric(descWorkers, prometheus.GaugeValue, float64(st.Workers))
}
