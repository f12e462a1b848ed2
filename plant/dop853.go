package plant

import "math"

// The eighth-order Dormand–Prince method with embedded fifth- and
// third-order error estimators, DOP853 (Hairer, Nørsett & Wanner, Solving
// Ordinary Differential Equations I, 2nd ed., Springer 1993, section II.10;
// the coefficients as published with their code DOP853). The values below
// are copied from the general-purpose reference library SciPy, file
// scipy/integrate/_ivp/dop853_coefficients.py of Debian's python3-scipy;
// the order test in dop853_test.go checks them. The right-hand side does
// not depend on time (a Policy sees only the state), so the nodes c_i are
// not needed.
var (
	// d8A holds the stage coefficients a_ij, i = 1 … 11; row 12 holds the
	// weights b_j of the eighth-order solution.
	d8A = [13][12]float64{
		{},
		{5.26001519587677318785587544488e-2},
		{1.97250569845378994544595329183e-2, 5.91751709536136983633785987549e-2},
		{2.95875854768068491816892993775e-2, 0, 8.87627564304205475450678981324e-2},
		{2.41365134159266685502369798665e-1, 0, -8.84549479328286085344864962717e-1, 9.24834003261792003115737966543e-1},
		{3.7037037037037037037037037037e-2, 0, 0, 1.70828608729473871279604482173e-1, 1.25467687566822425016691814123e-1},
		{3.7109375e-2, 0, 0, 1.70252211019544039314978060272e-1, 6.02165389804559606850219397283e-2, -1.7578125e-2},
		{3.70920001185047927108779319836e-2, 0, 0, 1.70383925712239993810214054705e-1, 1.07262030446373284651809199168e-1, -1.53194377486244017527936158236e-2, 8.27378916381402288758473766002e-3},
		{6.24110958716075717114429577812e-1, 0, 0, -3.36089262944694129406857109825, -8.68219346841726006818189891453e-1, 2.75920996994467083049415600797e1, 2.01540675504778934086186788979e1, -4.34898841810699588477366255144e1},
		{4.77662536438264365890433908527e-1, 0, 0, -2.48811461997166764192642586468, -5.90290826836842996371446475743e-1, 2.12300514481811942347288949897e1, 1.52792336328824235832596922938e1, -3.32882109689848629194453265587e1, -2.03312017085086261358222928593e-2},
		{-9.3714243008598732571704021658e-1, 0, 0, 5.18637242884406370830023853209, 1.09143734899672957818500254654, -8.14978701074692612513997267357, -1.85200656599969598641566180701e1, 2.27394870993505042818970056734e1, 2.49360555267965238987089396762, -3.0467644718982195003823669022},
		{2.27331014751653820792359768449, 0, 0, -1.05344954667372501984066689879e1, -2.00087205822486249909675718444, -1.79589318631187989172765950534e1, 2.79488845294199600508499808837e1, -2.85899827713502369474065508674, -8.87285693353062954433549289258, 1.23605671757943030647266201528e1, 6.43392746015763530355970484046e-1},
		{5.42937341165687622380535766363e-2, 0, 0, 0, 0, 4.45031289275240888144113950566, 1.89151789931450038304281599044, -5.8012039600105847814672114227, 3.1116436695781989440891606237e-1, -1.52160949662516078556178806805e-1, 2.01365400804030348374776537501e-1, 4.47106157277725905176885569043e-2},
	}
	// d8E5 holds the weights of the fifth-order error estimate (b − b̂₅).
	d8E5 = [12]float64{0.1312004499419488073250102996e-1, 0, 0, 0, 0, -0.1225156446376204440720569753e+1, -0.4957589496572501915214079952, 0.1664377182454986536961530415e+1, -0.3503288487499736816886487290, 0.3341791187130174790297318841, 0.8192320648511571246570742613e-1, -0.2235530786388629525884427845e-1}
	// d8B3 holds the third-order weights b̂₃; the third-order estimate is
	// b − b̂₃.
	d8B3 = [12]float64{0.244094488188976377952755905512, 0, 0, 0, 0, 0, 0, 0, 0.733846688281611857341361741547, 0, 0, 0.220588235294117647058823529412e-1}
)

// d8Exponent is −1/(q+1) for the error estimate of order q = 7 that
// controls the step (as in DOP853).
const d8Exponent = -1.0 / 8

// dop853Step takes one DOP853 step of size h from x0 (k1 its evaluation).
// out receives the eighth-order solution, k13 the evaluation there (first
// same as last: the next step's k1), and the return value is the scaled
// error norm (≤ 1: acceptable for rtol, atol), or +Inf if an evaluation
// failed. The norm is the one of DOP853: the fifth-order estimate,
// corrected by the third-order one where the two disagree,
//
//	err = |h| ‖e₅‖² / √((‖e₅‖² + 0.01 ‖e₃‖²)·N)
//
// with the components scaled by atol + rtol·max(|x₀|, |x₁|) and N = 2n.
//
// stg receives the stage derivatives (rows 0 … 12; row 12 at out), which
// the dense output of the step (d8Dense) builds on.
func (m *Model) dop853Step(s *State, x0 *phase, k1 *eval, h float64, pol Policy, rtol, atol float64, out *phase, k13 *eval, stg *d8Stages) float64 {
	n := m.n
	kq, kv := &stg.q, &stg.v
	kq[0], kv[0] = x0.v, k1.acc
	var x phase
	var ev eval
	for st := 1; st <= 12; st++ {
		a := &d8A[st]
		for i := 0; i < n; i++ {
			dq, dv := 0.0, 0.0
			for j := 0; j < st; j++ {
				if a[j] != 0 {
					dq += a[j] * kq[j][i]
					dv += a[j] * kv[j][i]
				}
			}
			x.q[i] = x0.q[i] + h*dq
			x.v[i] = x0.v[i] + h*dv
		}
		if st == 12 {
			break // x is the eighth-order solution; k13 is evaluated below
		}
		m.evalGeom(s, &x.q, &x.v, pol, &ev, false)
		if !ev.ok {
			return math.Inf(1)
		}
		kq[st], kv[st] = x.v, ev.acc
	}
	*out = x
	m.evalAt(s, &x.q, &x.v, pol, k13)
	if !k13.ok {
		return math.Inf(1)
	}
	kq[12], kv[12] = x.v, k13.acc
	e5, e3 := 0.0, 0.0
	for i := 0; i < n; i++ {
		e5q, e5v, e3q, e3v := 0.0, 0.0, 0.0, 0.0
		for j := 0; j < 12; j++ {
			w3 := d8A[12][j] - d8B3[j]
			e5q += d8E5[j] * kq[j][i]
			e5v += d8E5[j] * kv[j][i]
			e3q += w3 * kq[j][i]
			e3v += w3 * kv[j][i]
		}
		sq := atol + rtol*math.Max(math.Abs(x0.q[i]), math.Abs(x.q[i]))
		sv := atol + rtol*math.Max(math.Abs(x0.v[i]), math.Abs(x.v[i]))
		e5 += (e5q/sq)*(e5q/sq) + (e5v/sv)*(e5v/sv)
		e3 += (e3q/sq)*(e3q/sq) + (e3v/sv)*(e3v/sv)
	}
	if e5 == 0 && e3 == 0 {
		return 0
	}
	return math.Abs(h) * e5 / math.Sqrt((e5+0.01*e3)*float64(2*n))
}

// d8Stages holds the stage derivatives of one DOP853 step: rows 0 … 11 the
// stages, 12 the derivative at the new point, 13 … 15 the extra stages of
// the dense output.
type d8Stages struct {
	q, v [16][MaxDOF]float64
}

// The extra stages and the interpolation weights of the dense output of
// DOP853 (its seventh-order continuous extension; same sources as d8A:
// scipy/integrate/_ivp/dop853_coefficients.py, A[13:16] and D).
var (
	d8AExtra = [3][15]float64{
		{5.61675022830479523392909219681e-2, 0, 0, 0, 0, 0, 2.53500210216624811088794765333e-1, -2.46239037470802489917441475441e-1, -1.24191423263816360469010140626e-1, 1.5329179827876569731206322685e-1, 8.20105229563468988491666602057e-3, 7.56789766054569976138603589584e-3, -8.298e-3},
		{3.18346481635021405060768473261e-2, 0, 0, 0, 0, 2.83009096723667755288322961402e-2, 5.35419883074385676223797384372e-2, -5.49237485713909884646569340306e-2, 0, 0, -1.08347328697249322858509316994e-4, 3.82571090835658412954920192323e-4, -3.40465008687404560802977114492e-4, 1.41312443674632500278074618366e-1},
		{-4.28896301583791923408573538692e-1, 0, 0, 0, 0, -4.69762141536116384314449447206, 7.68342119606259904184240953878, 4.06898981839711007970213554331, 3.56727187455281109270669543021e-1, 0, 0, 0, -1.39902416515901462129418009734e-3, 2.9475147891527723389556272149, -9.15095847217987001081870187138},
	}
	d8D = [4][16]float64{
		{-0.84289382761090128651353491142e+1, 0, 0, 0, 0, 0.56671495351937776962531783590, -0.30689499459498916912797304727e+1, 0.23846676565120698287728149680e+1, 0.21170345824450282767155149946e+1, -0.87139158377797299206789907490, 0.22404374302607882758541771650e+1, 0.63157877876946881815570249290, -0.88990336451333310820698117400e-1, 0.18148505520854727256656404962e+2, -0.91946323924783554000451984436e+1, -0.44360363875948939664310572000e+1},
		{0.10427508642579134603413151009e+2, 0, 0, 0, 0, 0.24228349177525818288430175319e+3, 0.16520045171727028198505394887e+3, -0.37454675472269020279518312152e+3, -0.22113666853125306036270938578e+2, 0.77334326684722638389603898808e+1, -0.30674084731089398182061213626e+2, -0.93321305264302278729567221706e+1, 0.15697238121770843886131091075e+2, -0.31139403219565177677282850411e+2, -0.93529243588444783865713862664e+1, 0.35816841486394083752465898540e+2},
		{0.19985053242002433820987653617e+2, 0, 0, 0, 0, -0.38703730874935176555105901742e+3, -0.18917813819516756882830838328e+3, 0.52780815920542364900561016686e+3, -0.11573902539959630126141871134e+2, 0.68812326946963000169666922661e+1, -0.10006050966910838403183860980e+1, 0.77771377980534432092869265740, -0.27782057523535084065932004339e+1, -0.60196695231264120758267380846e+2, 0.84320405506677161018159903784e+2, 0.11992291136182789328035130030e+2},
		{-0.25693933462703749003312586129e+2, 0, 0, 0, 0, -0.15418974869023643374053993627e+3, -0.23152937917604549567536039109e+3, 0.35763911791061412378285349910e+3, 0.93405324183624310003907691704e+2, -0.37458323136451633156875139351e+2, 0.10409964950896230045147246184e+3, 0.29840293426660503123344363579e+2, -0.43533456590011143754432175058e+2, 0.96324553959188282948394950600e+2, -0.39177261675615439165231486172e+2, -0.14972683625798562581422125276e+3},
	}
)

// d8Dense is the continuous extension of one DOP853 step from x0 over h:
// x(x0 + θh) for θ in [0, 1], of seventh order, from the step's stages and
// three more evaluations.
type d8Dense struct {
	x0 phase
	f  [7]phase
}

// dense builds the continuous extension of the step from x0 to x1 of
// size h whose stages are in stg (rows 0 … 12). It reports false if an
// extra evaluation failed.
func (m *Model) dense853(s *State, x0, x1 *phase, h float64, pol Policy, stg *d8Stages, d *d8Dense) bool {
	n := m.n
	var x phase
	var ev eval
	for e := 0; e < 3; e++ {
		st := 13 + e
		a := &d8AExtra[e]
		for i := 0; i < n; i++ {
			dq, dv := 0.0, 0.0
			for j := 0; j < st; j++ {
				if a[j] != 0 {
					dq += a[j] * stg.q[j][i]
					dv += a[j] * stg.v[j][i]
				}
			}
			x.q[i] = x0.q[i] + h*dq
			x.v[i] = x0.v[i] + h*dv
		}
		m.evalGeom(s, &x.q, &x.v, pol, &ev, false)
		if !ev.ok {
			return false
		}
		stg.q[st], stg.v[st] = x.v, ev.acc
	}
	d.x0 = *x0
	for i := 0; i < n; i++ {
		dq, dv := x1.q[i]-x0.q[i], x1.v[i]-x0.v[i]
		d.f[0].q[i], d.f[0].v[i] = dq, dv
		d.f[1].q[i], d.f[1].v[i] = h*stg.q[0][i]-dq, h*stg.v[0][i]-dv
		d.f[2].q[i] = 2*dq - h*(stg.q[12][i]+stg.q[0][i])
		d.f[2].v[i] = 2*dv - h*(stg.v[12][i]+stg.v[0][i])
		for r := 0; r < 4; r++ {
			sq, sv := 0.0, 0.0
			for j := 0; j < 16; j++ {
				if w := d8D[r][j]; w != 0 {
					sq += w * stg.q[j][i]
					sv += w * stg.v[j][i]
				}
			}
			d.f[3+r].q[i], d.f[3+r].v[i] = h*sq, h*sv
		}
	}
	return true
}

// at writes x(x0 + θh) into out (n coordinates and rates).
func (d *d8Dense) at(n int, theta float64, out *phase) {
	for i := 0; i < n; i++ {
		yq, yv := 0.0, 0.0
		for k := 6; k >= 0; k-- {
			yq += d.f[k].q[i]
			yv += d.f[k].v[i]
			if (6-k)%2 == 0 {
				yq *= theta
				yv *= theta
			} else {
				yq *= 1 - theta
				yv *= 1 - theta
			}
		}
		out.q[i] = d.x0.q[i] + yq
		out.v[i] = d.x0.v[i] + yv
	}
}
