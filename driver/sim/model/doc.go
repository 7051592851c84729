// Package model is the physics of the simulated bench, in model time
// (seconds, a float64 the caller supplies): the DUT's complex response,
// the waveform at the DUT output and the Fourier series of its square,
// the first-order mean-square averager of a true-RMS converter or DMM,
// solved exactly between events, and the mean of a meter's output over a
// voltmeter aperture.
//
// Nothing here reads a clock or draws random numbers; the simulated bench
// (package sim) supplies time and noise.
//
// # The averaging filter
//
// A true-RMS converter squares its input x(t), averages x² with a
// first-order filter of time constant τ and takes the square root:
//
//	τ y'(t) + y(t) = u(t),  u = x²,  output = √y.
//
// For a periodic input, u(t) = C0 + Σ Re(A_k e^{jkωt}) (a Fourier series
// of x², ω = 2πf). Each term is a forcing e^{jΩt}; trying y = B e^{jΩt}
// gives (1 + jΩτ) B = A, so the steady state is
//
//	y_ss(t) = C0 + Σ Re(A_k/(1+jkωτ) e^{jkωt})
//
// and the general solution adds the homogeneous term:
//
//	y(t) = y_ss(t) + (y(t0) - y_ss(t0)) e^{-(t-t0)/τ}.
//
// For a sine of peak P, x² = P²/2 (1 - cos 2ωt): C0 = P²/2 and one term
// at Ω = 2ω of amplitude P²/2, so the ripple on the mean square relative
// to its mean is
//
//	r = 1/|1 + j2ωτ| = 1/√(1 + (4πfτ)²),
//
// and on the output √y about r/2. A step in amplitude or frequency
// settles as e^{-t/τ} (within e^{-5} ≈ 0.674 % after 5τ).
package model
