// param_slab.cpp — registration and bookkeeping of the parameter and gradient slabs.
#include "quant/param_slab.h"

#include <algorithm>

#include "audio/error.h"

namespace tessera::quant {

ParamRef ParamSlab::add(std::string name, std::vector<int> shape) {
  if (find(name)) throw Error("parameter '" + name + "' is registered twice");
  std::size_t n = 1;
  for (int d : shape) {
    if (d <= 0) throw Error("parameter '" + name + "': dimension " + std::to_string(d) + " is not positive");
    n *= std::size_t(d);
  }
  const ParamRef ref{params_.size(), n};
  params_.resize(params_.size() + n, 0.0f);
  grads_.resize(grads_.size() + n, 0.0f);
  entries_.push_back({std::move(name), std::move(shape), ref});
  return ref;
}

void ParamSlab::zero_grad() { std::fill(grads_.begin(), grads_.end(), 0.0f); }

const ParamEntry* ParamSlab::find(std::string_view name) const {
  for (const ParamEntry& e : entries_)
    if (e.name == name) return &e;
  return nullptr;
}

}  // namespace tessera::quant
