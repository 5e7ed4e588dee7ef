#pragma once
// Hidden neurons that are exact copies of each other, and the directions that keep them so.
//
// Two neurons j, k of hidden layer l (rows of weight layer l, columns of weight layer l + 1) are
// tied when their incoming rows, biases and outgoing columns agree. Every parameterization
// plaudit reads treats the neurons of a layer alike, so tied neurons get identical gradients on
// any batch: gradient descent, full-batch or minibatch, keeps them tied for ever. Directions that
// pull copies apart (the symmetry-breaking saddles of duplicated neurons: Fukumizu & Amari,
// "Local minima and plateaus in hierarchical structures of multilayer perceptrons", Neural
// Networks 13, 2000) are therefore out of training's reach, and a curvature check must only
// look along directions that move every copy of a neuron the same way.
#include <vector>

#include <Eigen/Core>

#include "plaudit/model/hessian.h"
#include "plaudit/model/network.h"

namespace plaudit::model {

struct NeuronTies {
  int layer = 0;  // 0-based weight layer whose rows are the tied neurons (a hidden layer)
  std::vector<std::vector<Eigen::Index>> groups;  // each with >= 2 neurons, ascending
};

// Tied groups of every hidden layer (layers with none are left out). Neurons j and k are tied
// when max |difference| over their incoming row, bias and outgoing column is <= tolerance times
// the largest |entry| of those vectors (tolerance 0: bit-identical).
std::vector<NeuronTies> FindNeuronTies(const Network& net, double tolerance);

// Number of neurons that belong to a tied group.
Eigen::Index TiedNeuronCount(const std::vector<NeuronTies>& ties);

// The orthogonal projection of v (over `layout`) onto the directions that keep every tied group
// tied: within a group, each incoming-weight, bias and outgoing-weight entry is replaced by the
// group's mean. Layers not in the layout are left alone.
void ProjectOntoTies(const ParameterLayout& layout, const std::vector<NeuronTies>& ties, Eigen::VectorXd& v);

}  // namespace plaudit::model
