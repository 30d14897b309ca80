// Plans are made with FFTW_ESTIMATE: measured plans may pick different
// algorithms run to run, which changes rounding and would break the
// bit-for-bit determinism of DESIGN.md §3.
#include "fft/fft.hpp"

#include <fftw3-mpi.h>
#include <fftw3.h>

#include <algorithm>
#include <map>
#include <mutex>
#include <tuple>
#include <utility>

#include "core/errors.hpp"

namespace spinflip::fft {
namespace {

// The FFTW planner is not thread-safe; execution of an existing plan is.
std::mutex& planner_mutex() {
  static std::mutex m;
  return m;
}

enum class Kind { c2c_fwd, c2c_inv, r2c, c2r };

// Memory layout beyond a contiguous array: 2D row pitches {in, out, 0, 0}, or a 1D
// batch's {in stride, in distance, out stride, out distance}; all 0 when contiguous.
using Layout = std::array<std::size_t, 4>;
constexpr Layout contiguous{0, 0, 0, 0};

// (precision, kind, shape, rank, in place, alignment of in, alignment of out, layout)
using PlanKey = std::tuple<int, Kind, std::array<std::size_t, 3>, int, bool, int, int, Layout>;

template <class Plan>
struct PlanCache {
  std::map<PlanKey, Plan> plans;
};

PlanCache<fftwf_plan>& float_plans() {
  static PlanCache<fftwf_plan> c;
  return c;
}
PlanCache<fftw_plan>& double_plans() {
  static PlanCache<fftw_plan> c;
  return c;
}

int to_int(std::size_t n) {
  if (n == 0 || n > static_cast<std::size_t>(1) << 30)
    throw InternalError("fft: transform size " + std::to_string(n) + " out of range");
  return static_cast<int>(n);
}

// A stride or distance for FFTW's int interface (0 allowed: a batch of one).
int to_int_stride(std::size_t n) {
  if (n > static_cast<std::size_t>(1) << 30) throw InternalError("fft: stride " + std::to_string(n) + " out of range");
  return static_cast<int>(n);
}

int threads_wanted = 1;

struct FloatApi {
  using real = float;
  using complex = fftwf_complex;
  using plan = fftwf_plan;
  static PlanCache<plan>& cache() { return float_plans(); }
  static int alignment(const void* p) { return fftwf_alignment_of(const_cast<float*>(static_cast<const float*>(p))); }
  static plan dft(int rank, const int* n, complex* in, complex* out, int sign) {
    return fftwf_plan_dft(rank, n, in, out, sign, FFTW_ESTIMATE);
  }
  static plan dft_many(int rank, const int* n, int howmany, complex* in, const int* inembed, int istride, int idist,
                       complex* out, const int* onembed, int ostride, int odist, int sign) {
    return fftwf_plan_many_dft(rank, n, howmany, in, inembed, istride, idist, out, onembed, ostride, odist, sign,
                               FFTW_ESTIMATE);
  }
  static plan r2c(int rank, const int* n, real* in, complex* out) {
    return fftwf_plan_dft_r2c(rank, n, in, out, FFTW_ESTIMATE);
  }
  static plan c2r(int rank, const int* n, complex* in, real* out) {
    return fftwf_plan_dft_c2r(rank, n, in, out, FFTW_ESTIMATE);
  }
  static void exec_dft(plan p, complex* in, complex* out) { fftwf_execute_dft(p, in, out); }
  static void exec_r2c(plan p, real* in, complex* out) { fftwf_execute_dft_r2c(p, in, out); }
  static void exec_c2r(plan p, complex* in, real* out) { fftwf_execute_dft_c2r(p, in, out); }
};

struct DoubleApi {
  using real = double;
  using complex = fftw_complex;
  using plan = fftw_plan;
  static PlanCache<plan>& cache() { return double_plans(); }
  static int alignment(const void* p) { return fftw_alignment_of(const_cast<double*>(static_cast<const double*>(p))); }
  static plan dft(int rank, const int* n, complex* in, complex* out, int sign) {
    return fftw_plan_dft(rank, n, in, out, sign, FFTW_ESTIMATE);
  }
  static plan dft_many(int rank, const int* n, int howmany, complex* in, const int* inembed, int istride, int idist,
                       complex* out, const int* onembed, int ostride, int odist, int sign) {
    return fftw_plan_many_dft(rank, n, howmany, in, inembed, istride, idist, out, onembed, ostride, odist, sign,
                              FFTW_ESTIMATE);
  }
  static plan r2c(int rank, const int* n, real* in, complex* out) {
    return fftw_plan_dft_r2c(rank, n, in, out, FFTW_ESTIMATE);
  }
  static plan c2r(int rank, const int* n, complex* in, real* out) {
    return fftw_plan_dft_c2r(rank, n, in, out, FFTW_ESTIMATE);
  }
  static void exec_dft(plan p, complex* in, complex* out) { fftw_execute_dft(p, in, out); }
  static void exec_r2c(plan p, real* in, complex* out) { fftw_execute_dft_r2c(p, in, out); }
  static void exec_c2r(plan p, complex* in, real* out) { fftw_execute_dft_c2r(p, in, out); }
};

/// Find or make the plan for this transform. FFTW_ESTIMATE does not touch the
/// arrays, so planning on the caller's buffers is safe.
template <class Api, class In, class Out>
typename Api::plan plan_for(Kind kind, int rank, const std::array<std::size_t, 3>& shape, In* in, Out* out,
                            const Layout& layout = contiguous) {
  const bool in_place = static_cast<const void*>(in) == static_cast<const void*>(out);
  const PlanKey key{sizeof(typename Api::real), kind, shape, rank, in_place, Api::alignment(in),
                    Api::alignment(out), layout};
  std::lock_guard<std::mutex> lock(planner_mutex());
  auto& plans = Api::cache().plans;
  if (auto it = plans.find(key); it != plans.end()) return it->second;
  int n[3];
  for (int a = 0; a < rank; ++a) n[a] = to_int(shape[static_cast<std::size_t>(a)]);
  typename Api::plan p = nullptr;
  auto* cin = reinterpret_cast<typename Api::complex*>(in);
  auto* cout = reinterpret_cast<typename Api::complex*>(out);
  if (layout != contiguous) {  // c2c with pitched rows (rank 2) or a strided batch (rank 1)
    const int sign = kind == Kind::c2c_fwd ? FFTW_FORWARD : FFTW_BACKWARD;
    if (rank == 2) {
      const int inembed[2] = {n[0], to_int(layout[0])}, onembed[2] = {n[0], to_int(layout[1])};
      p = Api::dft_many(2, n, 1, cin, inembed, 1, 0, cout, onembed, 1, 0, sign);
    } else {
      p = Api::dft_many(1, n, to_int(shape[1]), cin, nullptr, to_int_stride(layout[0]), to_int_stride(layout[1]), cout,
                        nullptr, to_int_stride(layout[2]), to_int_stride(layout[3]), sign);
    }
    if (p == nullptr) throw InternalError("fft: FFTW could not make a plan");
    plans.emplace(key, p);
    return p;
  }
  switch (kind) {
    case Kind::c2c_fwd: p = Api::dft(rank, n, cin, cout, FFTW_FORWARD); break;
    case Kind::c2c_inv: p = Api::dft(rank, n, cin, cout, FFTW_BACKWARD); break;
    case Kind::r2c: p = Api::r2c(rank, n, reinterpret_cast<typename Api::real*>(in), cout); break;
    case Kind::c2r: p = Api::c2r(rank, n, cin, reinterpret_cast<typename Api::real*>(out)); break;
  }
  if (p == nullptr) throw InternalError("fft: FFTW could not make a plan");
  plans.emplace(key, p);
  return p;
}

template <class Api, class C>
void c2c(int rank, const std::array<std::size_t, 3>& shape, const C* in, C* out, Direction d) {
  auto* i = const_cast<C*>(in);
  auto p = plan_for<Api>(d == Direction::forward ? Kind::c2c_fwd : Kind::c2c_inv, rank, shape, i, out);
  Api::exec_dft(p, reinterpret_cast<typename Api::complex*>(i), reinterpret_cast<typename Api::complex*>(out));
}

template <class Api, class R, class C>
void r2c(int rank, const std::array<std::size_t, 3>& shape, const R* in, C* out) {
  auto* i = const_cast<R*>(in);
  auto p = plan_for<Api>(Kind::r2c, rank, shape, i, out);
  Api::exec_r2c(p, i, reinterpret_cast<typename Api::complex*>(out));
}

template <class Api, class C, class R>
void c2r(int rank, const std::array<std::size_t, 3>& shape, const C* in, R* out) {
  auto* i = const_cast<C*>(in);
  auto p = plan_for<Api>(Kind::c2r, rank, shape, i, out);
  Api::exec_c2r(p, reinterpret_cast<typename Api::complex*>(i), out);
}

std::array<std::size_t, 3> shape2(std::size_t n0, std::size_t n1) { return {n0, n1, 0}; }

void ensure_mpi_init() {
  static std::once_flag once;
  std::call_once(once, [] {
    fftwf_mpi_init();
    fftw_mpi_init();
  });
}

}  // namespace

// ---- Buffer ------------------------------------------------------------------

template <class T>
Buffer<T>::Buffer(std::size_t n) : size_(n) {
  if (n == 0) return;
  data_ = static_cast<T*>(fftw_malloc(n * sizeof(T)));
  if (data_ == nullptr) throw InternalError("fft: out of memory allocating " + std::to_string(n * sizeof(T)) + " bytes");
}
template <class T>
Buffer<T>::Buffer(Buffer&& other) noexcept : data_(std::exchange(other.data_, nullptr)), size_(std::exchange(other.size_, 0)) {}
template <class T>
Buffer<T>& Buffer<T>::operator=(Buffer&& other) noexcept {
  if (this != &other) {
    if (data_ != nullptr) fftw_free(data_);
    data_ = std::exchange(other.data_, nullptr);
    size_ = std::exchange(other.size_, 0);
  }
  return *this;
}
template <class T>
Buffer<T>::~Buffer() {
  if (data_ != nullptr) fftw_free(data_);
}
template class Buffer<float>;
template class Buffer<double>;
template class Buffer<cfloat>;
template class Buffer<cdouble>;

// ---- serial transforms ---------------------------------------------------------

void c2c_2d(std::size_t n0, std::size_t n1, const cfloat* in, cfloat* out, Direction d) {
  c2c<FloatApi>(2, shape2(n0, n1), in, out, d);
}
void c2c_2d(std::size_t n0, std::size_t n1, const cdouble* in, cdouble* out, Direction d) {
  c2c<DoubleApi>(2, shape2(n0, n1), in, out, d);
}
void r2c_2d(std::size_t n0, std::size_t n1, const float* in, cfloat* out) { r2c<FloatApi>(2, shape2(n0, n1), in, out); }
void r2c_2d(std::size_t n0, std::size_t n1, const double* in, cdouble* out) { r2c<DoubleApi>(2, shape2(n0, n1), in, out); }
void c2r_2d(std::size_t n0, std::size_t n1, const cfloat* in, float* out) { c2r<FloatApi>(2, shape2(n0, n1), in, out); }
void c2r_2d(std::size_t n0, std::size_t n1, const cdouble* in, double* out) { c2r<DoubleApi>(2, shape2(n0, n1), in, out); }
void r2c_3d(const std::array<std::size_t, 3>& n, const float* in, cfloat* out) { r2c<FloatApi>(3, n, in, out); }
void r2c_3d(const std::array<std::size_t, 3>& n, const double* in, cdouble* out) { r2c<DoubleApi>(3, n, in, out); }
void c2r_3d(const std::array<std::size_t, 3>& n, const cfloat* in, float* out) { c2r<FloatApi>(3, n, in, out); }
void c2r_3d(const std::array<std::size_t, 3>& n, const cdouble* in, double* out) { c2r<DoubleApi>(3, n, in, out); }
void c2c_3d(const std::array<std::size_t, 3>& n, const cfloat* in, cfloat* out, Direction d) {
  c2c<FloatApi>(3, n, in, out, d);
}

void c2c_2d_pitched(std::size_t n0, std::size_t n1, const cfloat* in, std::size_t in_pitch, cfloat* out,
                    std::size_t out_pitch, Direction d) {
  if (in_pitch < n1 || out_pitch < n1)
    throw InternalError("fft: row pitch " + std::to_string(std::min(in_pitch, out_pitch)) + " below row length " +
                        std::to_string(n1));
  auto* i = const_cast<cfloat*>(in);
  auto p = plan_for<FloatApi>(d == Direction::forward ? Kind::c2c_fwd : Kind::c2c_inv, 2, shape2(n0, n1), i, out,
                              Layout{in_pitch, out_pitch, 0, 0});
  FloatApi::exec_dft(p, reinterpret_cast<fftwf_complex*>(i), reinterpret_cast<fftwf_complex*>(out));
}

void c2c_1d_batch(std::size_t n, std::size_t count, const cfloat* in, std::size_t in_stride, std::size_t in_dist,
                  cfloat* out, std::size_t out_stride, std::size_t out_dist, Direction d) {
  if (count == 0) return;
  if (in_stride == 0 || out_stride == 0) throw InternalError("fft: batch stride 0");
  auto* i = const_cast<cfloat*>(in);
  auto p = plan_for<FloatApi>(d == Direction::forward ? Kind::c2c_fwd : Kind::c2c_inv, 1, {n, count, 0}, i, out,
                              Layout{in_stride, in_dist, out_stride, out_dist});
  FloatApi::exec_dft(p, reinterpret_cast<fftwf_complex*>(i), reinterpret_cast<fftwf_complex*>(out));
}

void set_threads(int n) {
  if (n < 1) throw ConfigError("fft threads must be at least 1, got " + std::to_string(n));
  std::lock_guard<std::mutex> lock(planner_mutex());
  static bool initialised = false;
  if (!initialised) {
    if (fftwf_init_threads() == 0 || fftw_init_threads() == 0)
      throw InternalError("fft: FFTW could not initialise threads");
    initialised = true;
  }
  threads_wanted = n;
  fftwf_plan_with_nthreads(n);
  fftw_plan_with_nthreads(n);
  // Plans made before keep their old thread count; forget them.
  for (auto& [k, p] : float_plans().plans) fftwf_destroy_plan(p);
  for (auto& [k, p] : double_plans().plans) fftw_destroy_plan(p);
  float_plans().plans.clear();
  double_plans().plans.clear();
}

void import_wisdom(const std::string& path) {
  std::lock_guard<std::mutex> lock(planner_mutex());
  // A missing or unreadable file just means planning from scratch.
  fftwf_import_wisdom_from_filename(path.c_str());
  fftw_import_wisdom_from_filename(path.c_str());
}

void export_wisdom(const std::string& path) {
  std::lock_guard<std::mutex> lock(planner_mutex());
  if (fftwf_export_wisdom_to_filename(path.c_str()) == 0)
    throw IoError(path + ": cannot write FFTW wisdom");
}

// ---- SlabField -------------------------------------------------------------------

struct SlabField::Impl {
  std::array<std::size_t, 3> shape{};
  MPI_Comm comm = MPI_COMM_SELF;
  bool distributed = false;
  std::size_t local_n0 = 0, local_start0 = 0, n_complex = 0;
  fftwf_complex* data = nullptr;
  fftwf_plan forward = nullptr, inverse = nullptr;

  ~Impl() {
    if (forward != nullptr || inverse != nullptr) {
      std::lock_guard<std::mutex> lock(planner_mutex());
      if (forward != nullptr) fftwf_destroy_plan(forward);
      if (inverse != nullptr) fftwf_destroy_plan(inverse);
    }
    if (data != nullptr) fftwf_free(data);
    if (distributed && comm != MPI_COMM_NULL) MPI_Comm_free(&comm);
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
  std::lock_guard<std::mutex> lock(planner_mutex());
  if (m.distributed) {
    ensure_mpi_init();
    // A private duplicate: FFTW-MPI keeps the communicator inside its plans.
    SPINFLIP_CHECK_MPI(MPI_Comm_dup(comm, &m.comm));
    ptrdiff_t local_n0 = 0, local_0_start = 0;
    const ptrdiff_t alloc = fftwf_mpi_local_size_3d(n0, n1, n2 / 2 + 1, m.comm, &local_n0, &local_0_start);
    m.local_n0 = static_cast<std::size_t>(local_n0);
    m.local_start0 = static_cast<std::size_t>(local_0_start);
    m.n_complex = static_cast<std::size_t>(std::max<ptrdiff_t>(alloc, 1));
    m.data = fftwf_alloc_complex(m.n_complex);
    if (m.data == nullptr) throw InternalError("fft: out of memory for a slab field");
    auto* r = reinterpret_cast<float*>(m.data);
    m.forward = fftwf_mpi_plan_dft_r2c_3d(n0, n1, n2, r, m.data, m.comm, FFTW_ESTIMATE);
    m.inverse = fftwf_mpi_plan_dft_c2r_3d(n0, n1, n2, m.data, r, m.comm, FFTW_ESTIMATE);
  } else {
    m.comm = MPI_COMM_SELF;
    m.local_n0 = global_shape[0];
    m.local_start0 = 0;
    m.n_complex = global_shape[0] * global_shape[1] * (global_shape[2] / 2 + 1);
    m.data = fftwf_alloc_complex(m.n_complex);
    if (m.data == nullptr) throw InternalError("fft: out of memory for a field");
    auto* r = reinterpret_cast<float*>(m.data);
    const int n[3] = {to_int(global_shape[0]), to_int(global_shape[1]), to_int(global_shape[2])};
    m.forward = fftwf_plan_dft_r2c(3, n, r, m.data, FFTW_ESTIMATE);
    m.inverse = fftwf_plan_dft_c2r(3, n, m.data, r, FFTW_ESTIMATE);
  }
  if (m.forward == nullptr || m.inverse == nullptr) throw InternalError("fft: FFTW could not plan a slab field");
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
