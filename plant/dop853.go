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
func (m *Model) dop853Step(s *State, x0 *phase, k1 *eval, h float64, pol Policy, rtol, atol float64, out *phase, k13 *eval) float64 {
	n := m.n
	var kq, kv [12][MaxDOF]float64 // stage derivatives of q and v
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
