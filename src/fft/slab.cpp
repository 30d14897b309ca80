// SlabField: a real 3D field with its r2c/c2r plans, serial or FFTW-MPI slabs
// (fft/fft.hpp), planned by the rules of the one planner (fft/planning.hpp).
#include <fftw3-mpi.h>
#include <fftw3.h>

#include <algorithm>
#include <chrono>
#include <sstream>

#include "core/errors.hpp"
#include "fft/fft.hpp"
#include "fft/internal.hpp"

namespace spinflip::fft {

using detail::planner_mutex;
using detail::state;

namespace {
int to_int(std::size_t n) {
  if (n == 0 || n > static_cast<std::size_t>(1) << 30)
    throw InternalError("fft: transform size " + std::to_string(n) + " out of range");
  return static_cast<int>(n);
}
double seconds_since(std::chrono::steady_clock::time_point t0) {
  return std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
}
}  // namespace

// ---- SlabField -------------------------------------------------------------------

struct SlabField::Impl {
  std::array<std::size_t, 3> shape{};
  MPI_Comm comm = MPI_COMM_SELF;
  bool distributed = false;
  std::size_t local_n0 = 0, local_start0 = 0, n_complex = 0;
  fftwf_complex* data = nullptr;
  fftwf_plan forward = nullptr, inverse = nullptr;

  Impl() = default;
  Impl(const Impl&) = delete;
  Impl& operator=(const Impl&) = delete;
  ~Impl() {
    release_plans();
    if (data != nullptr) fftwf_free(data);
    if (distributed && comm != MPI_COMM_NULL) MPI_Comm_free(&comm);
  }
  void release_plans() {
    std::lock_guard<std::recursive_mutex> lock(planner_mutex());
    if (forward != nullptr) fftwf_destroy_plan(forward);
    if (inverse != nullptr) fftwf_destroy_plan(inverse);
    forward = inverse = nullptr;
  }
  /// Both plans with `flags` (collective when distributed); false unless every rank got both.
  bool plan(unsigned flags) {
    const auto n0 = static_cast<ptrdiff_t>(shape[0]), n1 = static_cast<ptrdiff_t>(shape[1]),
               n2 = static_cast<ptrdiff_t>(shape[2]);
    auto* r = reinterpret_cast<float*>(data);
    if (distributed) {
      forward = fftwf_mpi_plan_dft_r2c_3d(n0, n1, n2, r, data, comm, flags);
      inverse = fftwf_mpi_plan_dft_c2r_3d(n0, n1, n2, data, r, comm, flags);
    } else {
      const int n[3] = {static_cast<int>(n0), static_cast<int>(n1), static_cast<int>(n2)};
      forward = fftwf_plan_dft_r2c(3, n, r, data, flags);
      inverse = fftwf_plan_dft_c2r(3, n, data, r, flags);
    }
    int ok = forward != nullptr && inverse != nullptr ? 1 : 0;
    if (distributed) SPINFLIP_CHECK_MPI(MPI_Allreduce(MPI_IN_PLACE, &ok, 1, MPI_INT, MPI_MIN, comm));
    if (ok == 0) release_plans();
    return ok == 1;
  }
};

SlabField::SlabField(const std::array<std::size_t, 3>& global_shape, MPI_Comm comm) : impl_(std::make_unique<Impl>()) {
  auto& m = *impl_;
  m.shape = global_shape;
  for (auto n : global_shape) to_int(n);
  int size = 1;
  SPINFLIP_CHECK_MPI(MPI_Comm_size(comm, &size));
  m.distributed = size > 1;
  const auto n0 = static_cast<ptrdiff_t>(global_shape[0]);
  const auto n1 = static_cast<ptrdiff_t>(global_shape[1]);
  const auto n2 = static_cast<ptrdiff_t>(global_shape[2]);
  std::lock_guard<std::recursive_mutex> lock(planner_mutex());
  if (m.distributed) {
    detail::ensure_mpi_init();
    // A private duplicate: FFTW-MPI keeps the communicator inside its plans.
    SPINFLIP_CHECK_MPI(MPI_Comm_dup(comm, &m.comm));
    ptrdiff_t local_n0 = 0, local_0_start = 0;
    const ptrdiff_t alloc = fftwf_mpi_local_size_3d(n0, n1, n2 / 2 + 1, m.comm, &local_n0, &local_0_start);
    m.local_n0 = static_cast<std::size_t>(local_n0);
    m.local_start0 = static_cast<std::size_t>(local_0_start);
    m.n_complex = static_cast<std::size_t>(std::max<ptrdiff_t>(alloc, 1));
  } else {
    m.comm = MPI_COMM_SELF;
    m.local_n0 = global_shape[0];
    m.local_start0 = 0;
    m.n_complex = global_shape[0] * global_shape[1] * (global_shape[2] / 2 + 1);
  }
  m.data = fftwf_alloc_complex(m.n_complex);
  if (m.data == nullptr) throw InternalError("fft: out of memory for a slab field");
  // Planned on the field's own storage (a measurement overwrites it; it is filled after).
  const auto& st = state();
  const auto t0 = std::chrono::steady_clock::now();
  std::string how = "estimate";
  bool ok = false;
  if (st.planning.rigor != Rigor::estimate) {
    // As for serial plans: wisdom-only takes any wisdom there is (FFTW_ESTIMATE looks it up).
    const unsigned rigor = st.wisdom_only ? FFTW_ESTIMATE : detail::rigor_flag(st.planning.rigor);
    fftwf_set_timelimit(st.planning.time_limit_s);
    ok = m.plan(rigor | FFTW_WISDOM_ONLY);
    how = "from wisdom";
    if (!ok && !st.wisdom_only) {
      ok = m.plan(rigor);
      how = detail::rigor_name(st.planning.rigor);
    } else if (!ok) {
      how = "estimate (not in wisdom)";
    }
  }
  if (!ok) ok = m.plan(FFTW_ESTIMATE);
  if (!ok) throw InternalError("fft: FFTW could not plan a slab field");
  std::ostringstream what;
  what << "r2c+c2r 3D " << n0 << "x" << n1 << "x" << n2 << " in place";
  if (m.distributed) what << " (FFTW-MPI slab, " << size << " ranks)";
  detail::record(what.str(), seconds_since(t0), how);
  std::fill_n(reinterpret_cast<float*>(m.data), 2 * m.n_complex, 0.0f);
}

SlabField::SlabField(SlabField&&) noexcept = default;
SlabField& SlabField::operator=(SlabField&&) noexcept = default;
SlabField::~SlabField() = default;

const std::array<std::size_t, 3>& SlabField::global_shape() const { return impl_->shape; }
std::size_t SlabField::local_n0() const { return impl_->local_n0; }
std::size_t SlabField::local_start0() const { return impl_->local_start0; }
MPI_Comm SlabField::comm() const { return impl_->comm; }
float* SlabField::real_data() { return reinterpret_cast<float*>(impl_->data); }
const float* SlabField::real_data() const { return reinterpret_cast<const float*>(impl_->data); }
cfloat* SlabField::complex_data() { return reinterpret_cast<cfloat*>(impl_->data); }
const cfloat* SlabField::complex_data() const { return reinterpret_cast<const cfloat*>(impl_->data); }
std::size_t SlabField::allocated_floats() const { return 2 * impl_->n_complex; }
void SlabField::forward() { fftwf_execute(impl_->forward); }
void SlabField::inverse() { fftwf_execute(impl_->inverse); }
void SlabField::fill(float value) { std::fill_n(real_data(), allocated_floats(), value); }

}  // namespace spinflip::fft
