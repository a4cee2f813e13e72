// Package skills implements unsupervised skill discovery by mutual
// information: priors over skill vectors z, discriminators q(z | s) that
// learn which states each skill reaches, the intrinsic rewards they define,
// and estimates that tell whether skills are being learned. A trained
// discriminator supplies the features phi for successor features: a
// FeatureMap presents it with the Dim and Features methods of the sf
// package's FeatureMap interface (phi of the next state).
//
// # Priors
//
// A skill z is drawn from a Prior at the start of each episode.
// UniformSphere{D} is uniform on the unit sphere S^{D-1} (density
// 1/area(S^{D-1}) relative to the surface measure); Categorical{K} is
// uniform over the K one-hot vectors e_k (log p = -log K).
//
// # Discriminators
//
// A Discriminator maps an observation x (a one-hot state or any vector) to
// features phi(x) such that log q(z | x) is linear in z. Two families, each
// with f (or the logits) either linear, f(x) = x W + b (tabular when x is
// one-hot), or a small multilayer perceptron (Net.Hidden):
//
// von Mises–Fisher (VMF), for z on S^{d-1}:
//
//	phi(x)       = f(x) / ||f(x)||                  (d features)
//	log q(z | x) = kappa phi(x) . z + log C_d(kappa)
//	C_d(kappa)   = kappa^{d/2-1} / ((2 pi)^{d/2} I_{d/2-1}(kappa))
//	reward       = phi(s') . z,    task vector w = z
//
// with kappa fixed or learned. The reward is the pseudo-reward
// log q(z | s') - log p(z) = kappa phi(s') . z + log C_d(kappa) + log area(S^{d-1})
// with the state-free constants dropped and the scale kappa divided out,
// so the task vector is the skill itself, as universal successor features
// need.
//
// Categorical (Softmax), for one-hot z = e_k:
//
//	q(. | x) = softmax(l(x))
//	phi(x)   = (log q(0 | x), ..., log q(K-1 | x), log K)   (K+1 features)
//	w        = (z, 1) = (e_k, 1)
//	reward   = phi(s') . w = log q(z | s') - log p(z)
//
// the pseudo-reward of Eysenbach et al. (2019, "Diversity is All You
// Need", eq. 3): 0 when the skills cannot be told apart, log K when the
// discriminator is certain and right. The last, constant feature carries
// log K; TaskVector appends the matching 1 to z. Callers that build w
// themselves must do the same.
//
// Update takes one Adam step (Kingma & Ba 2015) on the mean negative
// log-likelihood of a minibatch of (x, z) pairs (dense Adam by default;
// Optim.Method = OptimSparseAdam, for a linear f, updates only the rows of
// W whose input is non-zero in the minibatch and the bias, which makes a
// one-hot minibatch of r distinct states cost O((r + 1) d) instead of
// O(n d) for n states; it is a different optimiser, see OptimSparseAdam),
//
//	L = -(1/n) sum_i log q(z_i | x_i),
//
// with gradients, for the vMF family, dL/df_i = -(kappa/n)
// (z_i - (phi_i . z_i) phi_i) / ||f_i|| and, for a learned kappa,
// dL/dlog kappa = kappa (A_d(kappa) - mean_i phi_i . z_i) with
// A_d = I_{d/2}/I_{d/2-1} (VMFMeanLength); for the categorical family,
// dL/dl_i = (q_i - z_i)/n. Updates return the loss, report a non-finite
// loss or gradient as a *DivergenceError naming the update, and allocate
// nothing once the scratch buffers have been sized by the first minibatch.
//
// # Mutual information
//
// The variational lower bound of Barber & Agakov (2003),
//
//	I(S; Z) >= E[log q(z | s)] - E[log p(z)],
//
// is estimated from rollout pairs by MIMeter or EstimateMI, with its
// standard error and, for a Classifier, the accuracy of argmax_k q(k | s).
// For K categorical skills the bound cannot exceed H(Z) = log K.
//
// # The normalising constant
//
// VMFLogNorm computes log C_d(kappa) for any d >= 2 and kappa >= 0 without
// overflow, through log I_nu: the ascending series (Abramowitz & Stegun
// 9.6.10) for kappa <= 30 and the uniform asymptotic (Debye) expansion with
// twelve correction terms (A&S 9.7.7) above, both in the log domain, which
// is the same as using exp(-x) I_nu(x). Relative error is below 1e-13 for
// d <= 64 and kappa <= 1000 (tested against 256-bit series and closed
// forms); at kappa = 0 it returns -log area(S^{d-1}).
// BenchmarkVMFLogNorm times it.
//
// # Saving
//
// Discriminators marshal to a documented binary format (the library's
// framing: magic, version, payload length, CRC-32C; payload in
// marshal.go) that round-trips weights, kappa and optimiser state
// bit-exactly; loaders refuse anything else with an error wrapping
// ErrCorrupt. Marshal and Unmarshal embed one in a larger
// checkpoint; Save writes a file atomically and Load reads it back.
//
// Discriminators and feature maps are not safe for concurrent use; Clone
// gives an independent copy.
package skills
