package calib

import (
	"math"
	"sort"
)

// maxPipeEffects caps the pipes that get their own roughness about their
// group's: the best-seen ones (our choice; on the demo town and the
// 5,000-junction one a few dozen qualify).
const maxPipeEffects = 80

// addPipeEffects gives a pipe its own log-multiplier of roughness δ
// about its group's, with a prior of standard deviation
// Settings.PipeSpread, when the readings see it better than that prior
// does: when PipeSpread² × its information Σ w (∂obs/∂ln C)² at the
// recorded state (screen.h, the information of its log-resistance, times
// the square of its roughness elasticity) reaches one. A group's
// roughness is a mean over many pipes; where one pipe dominates what a
// precise sensor reads (a pump's rising main below its outlet logger),
// its own departure from the group would otherwise pull the whole group.
// This is the random-effects form of the hierarchical model of pipes
// within groups (Henderson's mixed-model equations: Henderson 1950, from
// memory); the effects are estimated with the rest and written into the
// calibrated network. It reports whether any pipe qualified.
func (m *model) addPipeEffects(screen *linkScreen, st *state) bool {
	tau := m.set.PipeSpread
	if tau <= 0 || m.set.NoRoughness || len(st.sols) == 0 {
		return false
	}
	type cand struct {
		link int
		info float64
	}
	net := st.nets[0]
	sol := st.sols[0]
	for _, s := range st.sols {
		if s != nil {
			sol = s
			break
		}
	}
	if sol == nil {
		return false
	}
	var cands []cand
	for l, p := range m.linkPar {
		if p < 0 {
			continue
		}
		e := roughnessElasticity(net, l, sol.Flow[l])
		if e == 0 {
			e = -hwExp
		}
		info := screen.h[l] * e * e
		if tau*tau*info >= 1 {
			cands = append(cands, cand{l, info})
		}
	}
	if len(cands) == 0 {
		return false
	}
	sort.SliceStable(cands, func(a, b int) bool { return cands[a].info > cands[b].info })
	cands = cands[:min(len(cands), maxPipeEffects)]
	sort.SliceStable(cands, func(a, b int) bool { return cands[a].link < cands[b].link })
	m.linkDev = make([]int, len(m.net.Links))
	for l := range m.linkDev {
		m.linkDev[l] = -1
	}
	for _, c := range cands {
		m.linkDev[c.link] = len(m.params)
		m.devLinks = append(m.devLinks, c.link)
		m.params = append(m.params, param{
			kind: pipeEffect, group: m.params[m.linkPar[c.link]].group, link: c.link,
			sd: tau, lo: -3 * tau, hi: 3 * tau,
			name: "roughness pipe " + m.net.Links[c.link].ID,
		})
	}
	return true
}

// pipeEffects returns the pipes with their own roughness, for the
// report: each one's factor on its group's roughness and the pipe's
// fitted roughness, with standard errors by the delta method.
func (m *model) pipeEffects(theta []float64, free []bool, cov interface{ At(i, j int) float64 }) []PipeEffect {
	var out []PipeEffect
	for _, l := range m.devLinks {
		p := m.linkDev[l]
		if !free[p] {
			continue
		}
		pr := &m.params[p]
		f := math.Exp(theta[p])
		v := math.Max(0, cov.At(p, p))
		lnC := theta[p]
		if g := m.linkPar[l]; g >= 0 && free[g] {
			lnC += theta[g]
			v += cov.At(g, g) + 2*cov.At(g, p)
		}
		c := m.rough0[l] * math.Exp(lnC)
		const eps = 1e-9
		out = append(out, PipeEffect{Link: m.net.Links[l].ID, Group: m.groups[pr.group].name,
			Factor: f, StdErr: f * math.Sqrt(math.Max(0, cov.At(p, p))),
			Prior: m.rough0[l], Estimate: c, EstimateStdErr: c * math.Sqrt(math.Max(0, v)),
			AtBound: theta[p] <= pr.lo+eps || theta[p] >= pr.hi-eps})
	}
	sort.SliceStable(out, func(a, b int) bool {
		return math.Abs(math.Log(out[a].Factor)) > math.Abs(math.Log(out[b].Factor))
	})
	return out
}
