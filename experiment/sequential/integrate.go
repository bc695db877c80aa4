package sequential

import "math"

// density is the sub-density of Z_j on the continuation region of look j:
// the density of the statistic on the paths that crossed at none of looks
// 1..j, held at the grid points z with Simpson weights w (Jennison and
// Turnbull 2000, section 19.2). Its integral is the probability of going
// on past look j.
type density struct {
	t       float64 // the look's information fraction
	z, w, h []float64
	// how it was made, so that it can be made again on a finer grid
	lo, hi, theta float64
	r             int
	parent        *density
}

// refined returns d, or d computed again on a grid of size parameter r
// when its own is coarser: the step to the next look may be narrower than
// d's grid (see lookR).
func (d *density) refined(r int) *density {
	if d == nil || d.r >= r {
		return d
	}
	return build(d.parent, d.t, d.lo, d.hi, d.theta, r)
}

// grid returns Jennison and Turnbull's (2000, section 19.2.1) integration
// points (r is their grid size parameter) and Simpson weights for a look whose statistic has mean mu,
// restricted to the continuation region (lo, hi): the 6r - 1 points
//
//	mu - 3 - 4 log(r/i),          i = 1, ..., r-1,
//	mu - 3 + 3 (i - r) / (2r),    i = r, ..., 5r,
//	mu + 3 + 4 log(r / (6r - i)), i = 5r+1, ..., 6r-1,
//
// that fall inside (lo, hi), with lo and hi themselves when they lie within
// the outermost points, and the midpoint of each pair of neighbours; the
// odd number of points then takes Simpson's weights d/6, 4d/6, d/6 on
// each interval of width d. It returns nothing when the region misses the
// grid.
func grid(mu, lo, hi float64, r int) (z, w []float64) {
	rf := float64(r)
	base := func(i int) float64 {
		switch {
		case i < r:
			return mu - 3 - 4*math.Log(rf/float64(i))
		case i <= 5*r:
			return mu - 3 + 3*float64(i-r)/(2*rf)
		default:
			return mu + 3 + 4*math.Log(rf/float64(6*r-i))
		}
	}
	n := 6*r - 1
	a, b := math.Max(lo, base(1)), math.Min(hi, base(n))
	if !(a < b) {
		return nil, nil
	}
	x := make([]float64, 0, n+2)
	x = append(x, a)
	for i := 1; i <= n; i++ {
		if xi := base(i); xi > a && xi < b {
			x = append(x, xi)
		}
	}
	x = append(x, b)
	m := len(x)
	z = make([]float64, 2*m-1)
	w = make([]float64, 2*m-1)
	for i := 0; i < m; i++ {
		z[2*i] = x[i]
		if i+1 < m {
			z[2*i+1] = (x[i] + x[i+1]) / 2
			d := x[i+1] - x[i]
			w[2*i] += d / 6
			w[2*i+1] += 4 * d / 6
			w[2*i+2] += d / 6
		}
	}
	return z, w
}

// lookR returns the grid size parameter of the look at information
// fraction t after prev: r, or more when the step from the previous look is
// small. The kernel of the recursion then has standard deviation s =
// sqrt((t_j - t_{j-1}) / t_j) on the z scale, narrower than the grid's
// tail spacing near 3.5 (about 4.5/r), and Simpson's rule needs several
// points per s: r_j = max(r, 20/s), at most 16r. (Jennison and Turnbull's
// grid assumes densities smooth on the scale of 1; this refinement is ours
// and is held by TestGridConvergence.) It is never below prev's.
func lookR(prev *density, t float64, r int) int {
	if prev == nil {
		return r
	}
	r = max(r, prev.r)
	s := math.Sqrt((t - prev.t) / t)
	need := math.Ceil(20 / s)
	if need > float64(16*r) {
		return 16 * r
	}
	return max(r, int(need))
}

// normalDensity is the standard normal density.
func normalDensity(x float64) float64 {
	return math.Exp(-x*x/2) / math.Sqrt(2*math.Pi)
}

// next returns the sub-density of the look at information fraction t, with
// continuation region (lo, hi) on the z scale, drift theta (E[Z] = theta
// sqrt(t)) and the previous look's sub-density prev (nil at the first
// look):
//
//	h_1(z) = phi(z - theta sqrt(t_1)),
//	h_j(z) = sum_i w_i h_{j-1}(z_i) sqrt(t_j/D) phi((z sqrt(t_j) - z_i sqrt(t_{j-1}) - theta D) / sqrt(D)),
//
// with D = t_j - t_{j-1} (Armitage, McPherson and Rowe 1969; Jennison and
// Turnbull 2000, section 19.2).
//
// The previous look's density is first refined to the grid of this look
// (lookR), so the returned density and the one it came from share r.
func next(prev *density, t, lo, hi, theta float64, r int) *density {
	r = lookR(prev, t, r)
	return build(prev.refined(r), t, lo, hi, theta, r)
}

// build is next on the grid of size parameter r, prev taken as it is.
func build(prev *density, t, lo, hi, theta float64, r int) *density {
	z, w := grid(theta*math.Sqrt(t), lo, hi, r)
	d := &density{t: t, z: z, w: w, h: make([]float64, len(z)), lo: lo, hi: hi, theta: theta, r: r, parent: prev}
	if prev == nil {
		for k, zk := range z {
			d.h[k] = normalDensity(zk - theta*math.Sqrt(t))
		}
		return d
	}
	delta := t - prev.t
	sd := math.Sqrt(delta)
	st, sp := math.Sqrt(t), math.Sqrt(prev.t)
	for k, zk := range z {
		s := 0.0
		for i, zi := range prev.z {
			s += prev.w[i] * prev.h[i] * normalDensity((zk*st-zi*sp-theta*delta)/sd)
		}
		d.h[k] = s * st / sd
	}
	return d
}

// crossAbove returns the probability of going on past every earlier look
// (prev, nil at the first look) and then having Z >= c at the look at
// information fraction t, under drift theta:
//
//	sum_i w_i h_{j-1}(z_i) (1 - Phi((c sqrt(t_j) - z_i sqrt(t_{j-1}) - theta D) / sqrt(D))).
func crossAbove(prev *density, t, c, theta float64) float64 {
	if math.IsInf(c, 1) {
		return 0
	}
	if prev == nil {
		return upperTail(c - theta*math.Sqrt(t))
	}
	delta := t - prev.t
	sd := math.Sqrt(delta)
	st, sp := math.Sqrt(t), math.Sqrt(prev.t)
	s := 0.0
	for i, zi := range prev.z {
		s += prev.w[i] * prev.h[i] * upperTail((c*st-zi*sp-theta*delta)/sd)
	}
	return s
}

// mirror returns the sub-density of -Z: the grid negated and reversed.
func (d *density) mirror() *density {
	if d == nil {
		return nil
	}
	n := len(d.z)
	m := &density{t: d.t, z: make([]float64, n), w: make([]float64, n), h: make([]float64, n)}
	for i := range d.z {
		m.z[n-1-i] = -d.z[i]
		m.w[n-1-i] = d.w[i]
		m.h[n-1-i] = d.h[i]
	}
	return m
}

// solveCritical returns the c >= the bracket's floor at which the chance
// under the null hypothesis of going on past every earlier look and then
// having Z >= c at this look equals target, by bisection to the last bits
// of c. A target of zero (or too small to reach within z <= 40) gives
// +Inf: the look cannot cross.
func solveCritical(prev *density, t, target, floor float64) float64 {
	const top = 40.0
	if !(target > 0) || crossAbove(prev, t, top, 0) >= target {
		return math.Inf(1)
	}
	lo, hi := floor, top
	if crossAbove(prev, t, lo, 0) <= target {
		return lo
	}
	for range 200 {
		mid := lo + (hi-lo)/2
		if mid <= lo || mid >= hi {
			break
		}
		if crossAbove(prev, t, mid, 0) > target {
			lo = mid
		} else {
			hi = mid
		}
	}
	return lo + (hi-lo)/2
}
