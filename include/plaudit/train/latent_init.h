#pragma once
// A correlated initialisation that keeps deep mean-field networks diverse: the neuronal-embedding
// construction of the multilayer mean-field framework (Nguyen & Pham 2020, "A rigorous framework
// for the mean field limit of multilayer neural networks"), in the spirit of the correlated,
// bidirectionally diverse initialisation of Pham & Nguyen 2020 ("A note on the global convergence
// of multilayer neural networks in the mean field regime"); the smooth maps below are plaudit's
// own choice of such functions.
//
// With i.i.d. weights, a neuron of layer l >= 2 averages its inputs against weights that are
// independent of them, so in the wide limit every neuron of a middle layer computes the same
// function. Here each neuron j of hidden layer l gets a latent point u_j ~ N(0, I_m), and every
// weight is a fixed smooth random function of the latent points of the two neurons it joins:
//     f_l(u)       = sqrt(2) cos(Omega_l u / lengthscale + beta_l)     (R random Fourier features,
//                    Omega_l ~ N(0, 1) entries, beta_l ~ U(0, 2 pi): a smooth random map)
//     first layer  W_1[j, :]   = s_1 f_1(u_j)^T A_1 / sqrt(R)            (A_1 ~ N(0, 1), R x d)
//     middle l     W_l[i, j]   = k_l f_l(u_i)^T B_l f_{l-1}(u_j) / R    (B_l ~ N(0, 1), R x R)
//     output       W_L[:, j]   = s_L A_L f_{L-1}(u_j) / sqrt(R)          (A_L ~ N(0, 1), k x R)
// so a middle neuron's incoming weights vary smoothly with the neurons it reads from (and are
// correlated with their own incoming weights), and its outgoing weights vary smoothly with it:
// diversity holds in both directions. s_1 and s_L are the gaussian scheme's sigma (init.h:
// mean-field gain, standard gain / sqrt(fan_in)), so first and output weights have the gaussian
// scheme's marginal spread. Middle layers use k_l = gain * sqrt(R) / (m_l * n_{l-1}) (mean-field:
// gain * sqrt(R)): averaging a smooth kernel against the previous layer keeps about 1/R of its
// variance (the features are nearly orthogonal), and this factor gives the pre-activations of
// every layer an O(1) spread instead of one shrinking geometrically with depth.
// The first layer has rank <= R: use features >= the input dimension for wide inputs.
// Biases start at zero; every weight is finally multiplied by `scale`. A network without hidden
// layers has no neurons to embed and gets the gaussian scheme.
#include <cstdint>
#include <string>

#include "plaudit/io/manifest.h"
#include "plaudit/model/network.h"

namespace plaudit::train {

struct LatentInitOptions {
  int latent_dim = 8;        // m, dimension of each neuron's latent point; 1..64
  int features = 32;         // R, random Fourier features per layer; 1..4096
  double lengthscale = 1.0;  // of the smooth maps in latent units; finite, > 0
  double gain = 1.0;         // as the gaussian scheme's gain; finite, > 0
  double scale = 1.0;        // multiplies every weight at the end; finite, > 0
  bool IsValid(std::string* why) const;  // message names the field, its value and the rule
};

// Fill the weights of `net` in place (shapes, multipliers and has_bias must be set, as
// train::InitialNetwork leaves them); biases become zero. Draws come from std::mt19937_64(seed)
// through train/draws.h, in a fixed order (per hidden layer: latent points row by row, then the
// frequencies, then the phases; then A_1, B_2 .. B_{L-1}, A_L), so a seed fixes the network.
// Invalid options raise Error(kUsage).
void InitializeLatent(model::Network& net, io::Parameterization p, const LatentInitOptions& options,
                      std::uint64_t seed);

}  // namespace plaudit::train
