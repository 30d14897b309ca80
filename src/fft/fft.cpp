// The one planner: every plan of the project is made here, once per problem
// (shape, layout, placement, alignment), under one lock, with the rigor and the
// wisdom of fft/planning.hpp. Plans are owned by shared RAII handles, so
// forgetting them (a new wisdom, a new thread count) never frees a plan that a
// caller is still running.
#include "fft/fft.hpp"

#include <fftw3-mpi.h>
#include <fftw3.h>

#include <algorithm>
#include <chrono>
#include <cstdint>
#include <map>
#include <mutex>
#include <sstream>
#include <tuple>
#include <utility>
#include <vector>

#include "core/errors.hpp"
#include "fft/internal.hpp"
#include "fft/planning.hpp"

namespace spinflip::fft {
namespace detail {
std::recursive_mutex& planner_mutex() {
  static std::recursive_mutex m;
  return m;
}
State& state() {
  static State s;
  return s;
}
void ensure_mpi_init() {
  static std::once_flag once;
  std::call_once(once, [] {
    fftwf_mpi_init();
    fftw_mpi_init();
  });
}
unsigned rigor_flag(Rigor r) {
  switch (r) {
    case Rigor::estimate: return FFTW_ESTIMATE;
    case Rigor::measure: return FFTW_MEASURE;
    case Rigor::patient: return FFTW_PATIENT;
  }
  return FFTW_ESTIMATE;
}
const char* rigor_name(Rigor r) { return r == Rigor::patient ? "patient" : "measured"; }
void record(std::string problem, double seconds, std::string how) {
  state().records.push_back({std::move(problem), seconds, std::move(how)});
}
}  // namespace detail

using detail::planner_mutex;
using detail::state;

namespace {

enum class Kind { c2c_fwd, c2c_inv, r2c, c2r };

/// One transform problem in FFTW's advanced ("many") terms: rank-d transforms of n,
/// `howmany` of them, embedded in arrays of dims *embed (0: none, FFTW's default
/// layout, padded rows for an in-place r2c), with strides and distances.
struct Problem {
  int precision = 4;  // sizeof(real)
  Kind kind = Kind::c2c_fwd;
  int rank = 1;
  std::array<int, 3> n{1, 1, 1};
  int howmany = 1;
  std::array<int, 3> inembed{0, 0, 0}, onembed{0, 0, 0};
  int istride = 1, idist = 0, ostride = 1, odist = 0;
  bool in_place = false;
  int in_align = 0, out_align = 0;  // FFTW's alignment_of of the caller's arrays

  auto key() const {
    return std::tie(precision, kind, rank, n, howmany, inembed, onembed, istride, idist, ostride, odist, in_place,
                    in_align, out_align);
  }
  bool operator<(const Problem& o) const { return key() < o.key(); }

  bool real_in() const { return kind == Kind::r2c; }
  bool real_out() const { return kind == Kind::c2r; }
  int last_half() const { return n[static_cast<std::size_t>(rank - 1)] / 2 + 1; }

  /// Elements (reals or complex) one side spans: the scratch a measured plan needs.
  std::size_t extent(bool input) const {
    const bool real = input ? real_in() : real_out();
    const bool half = !real && (kind == Kind::r2c || kind == Kind::c2r);
    const auto& embed = input ? inembed : onembed;
    const int stride = input ? istride : ostride, dist = input ? idist : odist;
    std::array<std::size_t, 3> dims{};
    for (int a = 0; a < rank; ++a) {
      const auto i = static_cast<std::size_t>(a);
      std::size_t d = static_cast<std::size_t>(n[i]);
      if (a == rank - 1) {
        if (half) d = static_cast<std::size_t>(last_half());
        else if (real && in_place && embed[0] == 0) d = 2 * static_cast<std::size_t>(last_half());
      }
      dims[i] = embed[0] != 0 ? static_cast<std::size_t>(embed[i]) : d;
    }
    std::size_t last = 0, step = 1;  // linear index of the last element of one transform
    for (int a = rank - 1; a >= 0; --a) {
      const auto i = static_cast<std::size_t>(a);
      std::size_t len = static_cast<std::size_t>(n[i]);
      if (a == rank - 1 && half) len = static_cast<std::size_t>(last_half());
      last += (len - 1) * step;
      step *= dims[i];
    }
    return static_cast<std::size_t>(howmany - 1) * static_cast<std::size_t>(dist) +
           last * static_cast<std::size_t>(stride) + 1;
  }

  std::string describe() const {
    std::ostringstream os;
    os << (kind == Kind::r2c ? "r2c" : kind == Kind::c2r ? "c2r" : kind == Kind::c2c_fwd ? "c2c forward" : "c2c inverse")
       << ' ' << rank << "D ";
    for (int a = 0; a < rank; ++a) os << (a ? "x" : "") << n[static_cast<std::size_t>(a)];
    if (precision == 8) os << " double";
    if (howmany > 1) os << ", " << howmany << " of them";
    if (inembed[0] != 0 || onembed[0] != 0 || istride != 1 || ostride != 1 || (howmany > 1 && (idist || odist))) {
      os << " (";
      if (inembed[0] != 0) os << "rows of " << inembed[static_cast<std::size_t>(rank - 1)] << " in, ";
      if (onembed[0] != 0) os << "rows of " << onembed[static_cast<std::size_t>(rank - 1)] << " out, ";
      os << "strides " << istride << "/" << ostride;
      if (howmany > 1) os << ", distances " << idist << "/" << odist;
      os << ")";
    }
    os << (in_place ? " in place" : "");
    return os.str();
  }
};

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

}  // namespace

// ---- plans ---------------------------------------------------------------------

struct Plan::Impl {
  fftwf_plan f = nullptr;
  fftw_plan d = nullptr;
  bool in_place = false;
  int in_align = 0, out_align = 0;
  Impl() = default;
  Impl(const Impl&) = delete;
  Impl& operator=(const Impl&) = delete;
  ~Impl() {
    std::lock_guard<std::recursive_mutex> lock(planner_mutex());
    if (f != nullptr) fftwf_destroy_plan(f);
    if (d != nullptr) fftw_destroy_plan(d);
  }
  template <class T>
  void check(const T* in, const T* out) const;
};

namespace {
int align_of(const void* p) { return fftwf_alignment_of(const_cast<float*>(static_cast<const float*>(p))); }
}  // namespace

template <class T>
void Plan::Impl::check(const T* in, const T* out) const {
  const bool same = static_cast<const void*>(in) == static_cast<const void*>(out);
  if (same != in_place || align_of(in) != in_align || align_of(out) != out_align)
    throw InternalError("fft: a plan run on arrays laid out unlike those it was made for (alignment or placement)");
}

Plan::Plan() = default;
Plan::~Plan() = default;
Plan::Plan(const Plan&) = default;
Plan& Plan::operator=(const Plan&) = default;
Plan::Plan(std::shared_ptr<const Impl> impl) : impl_(std::move(impl)) {}

void Plan::c2c(const cfloat* in, cfloat* out) const {
  impl_->check(in, out);
  fftwf_execute_dft(impl_->f, reinterpret_cast<fftwf_complex*>(const_cast<cfloat*>(in)),
                    reinterpret_cast<fftwf_complex*>(out));
}
void Plan::r2c(const float* in, cfloat* out) const {
  impl_->check(static_cast<const void*>(in), static_cast<const void*>(out));
  fftwf_execute_dft_r2c(impl_->f, const_cast<float*>(in), reinterpret_cast<fftwf_complex*>(out));
}
void Plan::c2r(cfloat* in_destroyed, float* out) const {
  impl_->check(static_cast<const void*>(in_destroyed), static_cast<const void*>(out));
  fftwf_execute_dft_c2r(impl_->f, reinterpret_cast<fftwf_complex*>(in_destroyed), out);
}

namespace {

struct FloatApi {
  using real = float;
  using complex = fftwf_complex;
  using plan = fftwf_plan;
  static constexpr int precision = 4;
  static plan dft(const Problem& p, void* in, void* out, const int* ie, const int* oe, unsigned flags) {
    return fftwf_plan_many_dft(p.rank, p.n.data(), p.howmany, static_cast<complex*>(in), ie, p.istride, p.idist,
                               static_cast<complex*>(out), oe, p.ostride, p.odist,
                               p.kind == Kind::c2c_fwd ? FFTW_FORWARD : FFTW_BACKWARD, flags);
  }
  static plan r2c(const Problem& p, void* in, void* out, const int* ie, const int* oe, unsigned flags) {
    return fftwf_plan_many_dft_r2c(p.rank, p.n.data(), p.howmany, static_cast<real*>(in), ie, p.istride, p.idist,
                                   static_cast<complex*>(out), oe, p.ostride, p.odist, flags);
  }
  static plan c2r(const Problem& p, void* in, void* out, const int* ie, const int* oe, unsigned flags) {
    return fftwf_plan_many_dft_c2r(p.rank, p.n.data(), p.howmany, static_cast<complex*>(in), ie, p.istride, p.idist,
                                   static_cast<real*>(out), oe, p.ostride, p.odist, flags);
  }
  static void set_timelimit(double t) { fftwf_set_timelimit(t); }
  static void store(Plan::Impl& i, plan p) { i.f = p; }
  static plan of(const Plan::Impl& i) { return i.f; }
  static void exec_dft(plan p, void* in, void* out) {
    fftwf_execute_dft(p, static_cast<complex*>(in), static_cast<complex*>(out));
  }
  static void exec_r2c(plan p, void* in, void* out) {
    fftwf_execute_dft_r2c(p, static_cast<real*>(in), static_cast<complex*>(out));
  }
  static void exec_c2r(plan p, void* in, void* out) {
    fftwf_execute_dft_c2r(p, static_cast<complex*>(in), static_cast<real*>(out));
  }
};

struct DoubleApi {
  using real = double;
  using complex = fftw_complex;
  using plan = fftw_plan;
  static constexpr int precision = 8;
  static plan dft(const Problem& p, void* in, void* out, const int* ie, const int* oe, unsigned flags) {
    return fftw_plan_many_dft(p.rank, p.n.data(), p.howmany, static_cast<complex*>(in), ie, p.istride, p.idist,
                              static_cast<complex*>(out), oe, p.ostride, p.odist,
                              p.kind == Kind::c2c_fwd ? FFTW_FORWARD : FFTW_BACKWARD, flags);
  }
  static plan r2c(const Problem& p, void* in, void* out, const int* ie, const int* oe, unsigned flags) {
    return fftw_plan_many_dft_r2c(p.rank, p.n.data(), p.howmany, static_cast<real*>(in), ie, p.istride, p.idist,
                                  static_cast<complex*>(out), oe, p.ostride, p.odist, flags);
  }
  static plan c2r(const Problem& p, void* in, void* out, const int* ie, const int* oe, unsigned flags) {
    return fftw_plan_many_dft_c2r(p.rank, p.n.data(), p.howmany, static_cast<complex*>(in), ie, p.istride, p.idist,
                                  static_cast<real*>(out), oe, p.ostride, p.odist, flags);
  }
  static void set_timelimit(double t) { fftw_set_timelimit(t); }
  static void store(Plan::Impl& i, plan p) { i.d = p; }
  static plan of(const Plan::Impl& i) { return i.d; }
  static void exec_dft(plan p, void* in, void* out) {
    fftw_execute_dft(p, static_cast<complex*>(in), static_cast<complex*>(out));
  }
  static void exec_r2c(plan p, void* in, void* out) {
    fftw_execute_dft_r2c(p, static_cast<real*>(in), static_cast<complex*>(out));
  }
  static void exec_c2r(plan p, void* in, void* out) {
    fftw_execute_dft_c2r(p, static_cast<complex*>(in), static_cast<real*>(out));
  }
};

/// Arrays to measure a plan on, with the caller's alignment (address mod 64), so
/// that planning never overwrites the caller's data.
class Scratch {
 public:
  Scratch(const Problem& p, const void* in, const void* out) {
    const std::size_t real = static_cast<std::size_t>(p.precision), cplx = 2 * real;
    const std::size_t in_bytes = p.extent(true) * (p.real_in() ? real : cplx);
    const std::size_t out_bytes = p.extent(false) * (p.real_out() ? real : cplx);
    in_ = place(p.in_place ? std::max(in_bytes, out_bytes) : in_bytes, in, mem_in_);
    out_ = p.in_place ? in_ : place(out_bytes, out, mem_out_);
  }
  Scratch(const Scratch&) = delete;
  Scratch& operator=(const Scratch&) = delete;
  ~Scratch() {
    if (mem_in_ != nullptr) fftw_free(mem_in_);
    if (mem_out_ != nullptr) fftw_free(mem_out_);
  }
  void* in() const { return in_; }
  void* out() const { return out_; }

 private:
  static void* place(std::size_t bytes, const void* like, void*& mem) {
    mem = fftw_malloc(bytes + 64);
    if (mem == nullptr) throw InternalError("fft: out of memory planning (" + std::to_string(bytes) + " bytes)");
    std::fill_n(static_cast<char*>(mem), bytes + 64, char{0});
    const auto base = reinterpret_cast<std::uintptr_t>(mem);
    const auto want = reinterpret_cast<std::uintptr_t>(like) % 64;
    return reinterpret_cast<void*>(base + (want + 64 - base % 64) % 64);
  }
  void* mem_in_ = nullptr;
  void* mem_out_ = nullptr;
  void* in_ = nullptr;
  void* out_ = nullptr;
};

double seconds_since(std::chrono::steady_clock::time_point t0) {
  return std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
}

}  // namespace

struct Planner {
  using Cache = std::map<Problem, std::shared_ptr<const Plan::Impl>>;
  static Cache& cache() {
    static Cache c;
    return c;
  }

  template <class Api>
  static typename Api::plan make(const Problem& p, void* in, void* out, unsigned flags) {
    const int* ie = p.inembed[0] != 0 ? p.inembed.data() : nullptr;
    const int* oe = p.onembed[0] != 0 ? p.onembed.data() : nullptr;
    switch (p.kind) {
      case Kind::r2c: return Api::r2c(p, in, out, ie, oe, flags);
      case Kind::c2r: return Api::c2r(p, in, out, ie, oe, flags);
      default: return Api::dft(p, in, out, ie, oe, flags);
    }
  }

  /// The plan for p, made on first use. Measured plans are timed on scratch arrays;
  /// FFTW_ESTIMATE never touches the arrays, so it plans on the caller's.
  template <class Api>
  static std::shared_ptr<const Plan::Impl> get(Problem p, const void* in, const void* out) {
    p.precision = Api::precision;
    p.in_place = in == out;
    p.in_align = align_of(in);
    p.out_align = align_of(out);
    std::lock_guard<std::recursive_mutex> lock(planner_mutex());
    if (auto it = cache().find(p); it != cache().end()) return it->second;
    auto* cin = const_cast<void*>(in);
    auto* cout = const_cast<void*>(out);
    const auto& st = state();
    const auto t0 = std::chrono::steady_clock::now();
    typename Api::plan plan = nullptr;
    std::string how;
    if (st.planning.rigor == Rigor::estimate) {
      plan = make<Api>(p, cin, cout, FFTW_ESTIMATE);
      how = "estimate";
    } else if (st.wisdom_only) {
      // FFTW_ESTIMATE takes any wisdom there is for the problem (also wisdom of a plan
      // whose measuring hit the time limit), and touches no array.
      plan = make<Api>(p, cin, cout, FFTW_ESTIMATE | FFTW_WISDOM_ONLY);
      how = "from wisdom";
      if (plan == nullptr) {
        plan = make<Api>(p, cin, cout, FFTW_ESTIMATE);
        how = "estimate (not in wisdom)";
      }
    } else {
      const unsigned rigor = detail::rigor_flag(st.planning.rigor);
      Api::set_timelimit(st.planning.time_limit_s);
      Scratch s(p, in, out);
      plan = make<Api>(p, s.in(), s.out(), rigor | FFTW_WISDOM_ONLY);
      if (plan != nullptr) {
        how = "from wisdom";
      } else {
        plan = make<Api>(p, s.in(), s.out(), rigor);
        how = detail::rigor_name(st.planning.rigor);
      }
    }
    if (plan == nullptr) throw InternalError("fft: FFTW could not make a plan for " + p.describe());
    auto impl = std::make_shared<Plan::Impl>();
    Api::store(*impl, plan);
    impl->in_place = p.in_place;
    impl->in_align = p.in_align;
    impl->out_align = p.out_align;
    detail::record(p.describe(), seconds_since(t0), how);
    cache().emplace(p, impl);
    return impl;
  }

  template <class Api>
  static Plan handle(const Problem& p, const void* in, const void* out) {
    return Plan(get<Api>(p, in, out));
  }
};

void detail::forget_cached_plans() {
  Planner::Cache old;
  {
    std::lock_guard<std::recursive_mutex> lock(planner_mutex());
    old.swap(Planner::cache());
    ++state().epoch;
  }
  // `old` goes here: plans that callers still hold live on in their handles.
}

namespace {

Problem contiguous(Kind kind, int rank, const std::array<std::size_t, 3>& shape) {
  Problem p;
  p.kind = kind;
  p.rank = rank;
  for (int a = 0; a < rank; ++a) p.n[static_cast<std::size_t>(a)] = to_int(shape[static_cast<std::size_t>(a)]);
  return p;
}

Kind c2c_kind(Direction d) { return d == Direction::forward ? Kind::c2c_fwd : Kind::c2c_inv; }

template <class Api, class In, class Out>
void run(const Problem& p, const In* in, Out* out) {
  const auto impl = Planner::get<Api>(p, in, out);
  auto* i = const_cast<In*>(in);
  switch (p.kind) {
    case Kind::r2c: Api::exec_r2c(Api::of(*impl), i, out); break;
    case Kind::c2r: Api::exec_c2r(Api::of(*impl), i, out); break;
    default: Api::exec_dft(Api::of(*impl), i, out); break;
  }
}

std::array<std::size_t, 3> shape2(std::size_t n0, std::size_t n1) { return {n0, n1, 1}; }

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
  run<FloatApi>(contiguous(c2c_kind(d), 2, shape2(n0, n1)), in, out);
}
void c2c_2d(std::size_t n0, std::size_t n1, const cdouble* in, cdouble* out, Direction d) {
  run<DoubleApi>(contiguous(c2c_kind(d), 2, shape2(n0, n1)), in, out);
}
void r2c_2d(std::size_t n0, std::size_t n1, const float* in, cfloat* out) {
  run<FloatApi>(contiguous(Kind::r2c, 2, shape2(n0, n1)), in, out);
}
void r2c_2d(std::size_t n0, std::size_t n1, const double* in, cdouble* out) {
  run<DoubleApi>(contiguous(Kind::r2c, 2, shape2(n0, n1)), in, out);
}
void c2r_2d(std::size_t n0, std::size_t n1, cfloat* in_destroyed, float* out) {
  run<FloatApi>(contiguous(Kind::c2r, 2, shape2(n0, n1)), in_destroyed, out);
}
void c2r_2d(std::size_t n0, std::size_t n1, cdouble* in_destroyed, double* out) {
  run<DoubleApi>(contiguous(Kind::c2r, 2, shape2(n0, n1)), in_destroyed, out);
}
void r2c_3d(const std::array<std::size_t, 3>& n, const float* in, cfloat* out) {
  run<FloatApi>(contiguous(Kind::r2c, 3, n), in, out);
}
void r2c_3d(const std::array<std::size_t, 3>& n, const double* in, cdouble* out) {
  run<DoubleApi>(contiguous(Kind::r2c, 3, n), in, out);
}
void c2r_3d(const std::array<std::size_t, 3>& n, cfloat* in_destroyed, float* out) {
  run<FloatApi>(contiguous(Kind::c2r, 3, n), in_destroyed, out);
}
void c2r_3d(const std::array<std::size_t, 3>& n, cdouble* in_destroyed, double* out) {
  run<DoubleApi>(contiguous(Kind::c2r, 3, n), in_destroyed, out);
}
void c2c_3d(const std::array<std::size_t, 3>& n, const cfloat* in, cfloat* out, Direction d) {
  run<FloatApi>(contiguous(c2c_kind(d), 3, n), in, out);
}

namespace {
Problem pitched_c2c(std::size_t n0, std::size_t n1, std::size_t in_pitch, std::size_t out_pitch, Direction d) {
  if (in_pitch < n1 || out_pitch < n1)
    throw InternalError("fft: row pitch " + std::to_string(std::min(in_pitch, out_pitch)) + " below row length " +
                        std::to_string(n1));
  Problem p = contiguous(c2c_kind(d), 2, shape2(n0, n1));
  p.inembed = {p.n[0], to_int(in_pitch), 0};
  p.onembed = {p.n[0], to_int(out_pitch), 0};
  return p;
}
Problem batch_1d(std::size_t n, std::size_t count, std::size_t in_stride, std::size_t in_dist, std::size_t out_stride,
                 std::size_t out_dist, Direction d) {
  if (in_stride == 0 || out_stride == 0) throw InternalError("fft: batch stride 0");
  Problem p = contiguous(c2c_kind(d), 1, {n, 1, 1});
  p.howmany = to_int(count);
  p.istride = to_int_stride(in_stride);
  p.idist = to_int_stride(in_dist);
  p.ostride = to_int_stride(out_stride);
  p.odist = to_int_stride(out_dist);
  return p;
}
Problem many_2d(Kind kind, std::size_t n0, std::size_t n1, std::size_t count, std::size_t in_pitch,
                std::size_t in_dist, std::size_t out_pitch, std::size_t out_dist) {
  Problem p = contiguous(kind, 2, shape2(n0, n1));
  p.howmany = to_int(count);
  p.inembed = {p.n[0], to_int(in_pitch), 0};
  p.onembed = {p.n[0], to_int(out_pitch), 0};
  p.idist = to_int_stride(in_dist);
  p.odist = to_int_stride(out_dist);
  return p;
}
}  // namespace

void c2c_2d_pitched(std::size_t n0, std::size_t n1, const cfloat* in, std::size_t in_pitch, cfloat* out,
                    std::size_t out_pitch, Direction d) {
  run<FloatApi>(pitched_c2c(n0, n1, in_pitch, out_pitch, d), in, out);
}

void c2c_1d_batch(std::size_t n, std::size_t count, const cfloat* in, std::size_t in_stride, std::size_t in_dist,
                  cfloat* out, std::size_t out_stride, std::size_t out_dist, Direction d) {
  if (count == 0) return;
  run<FloatApi>(batch_1d(n, count, in_stride, in_dist, out_stride, out_dist, d), in, out);
}

Plan plan_r2c_2d_many(std::size_t n0, std::size_t n1, std::size_t count, const float* real, std::size_t real_pitch,
                      std::size_t real_dist, cfloat* complex, std::size_t complex_pitch, std::size_t complex_dist) {
  if (real_pitch < n1 || complex_pitch < n1 / 2 + 1) throw InternalError("fft: r2c row pitch below the row length");
  return Planner::handle<FloatApi>(many_2d(Kind::r2c, n0, n1, count, real_pitch, real_dist, complex_pitch, complex_dist),
                                   real, complex);
}
Plan plan_c2r_2d_many(std::size_t n0, std::size_t n1, std::size_t count, cfloat* complex, std::size_t complex_pitch,
                      std::size_t complex_dist, float* real, std::size_t real_pitch, std::size_t real_dist) {
  if (real_pitch < n1 || complex_pitch < n1 / 2 + 1) throw InternalError("fft: c2r row pitch below the row length");
  return Planner::handle<FloatApi>(many_2d(Kind::c2r, n0, n1, count, complex_pitch, complex_dist, real_pitch, real_dist),
                                   complex, real);
}
Plan plan_c2c_1d_many(std::size_t n, std::size_t count, const cfloat* in, std::size_t in_stride, std::size_t in_dist,
                      cfloat* out, std::size_t out_stride, std::size_t out_dist, Direction d) {
  return Planner::handle<FloatApi>(batch_1d(n, count, in_stride, in_dist, out_stride, out_dist, d), in, out);
}

void set_threads(int n) {
  if (n < 1) throw ConfigError("fft threads must be at least 1, got " + std::to_string(n));
  {
    std::lock_guard<std::recursive_mutex> lock(planner_mutex());
    static bool initialised = false;
    if (!initialised) {
      if (fftwf_init_threads() == 0 || fftw_init_threads() == 0)
        throw InternalError("fft: FFTW could not initialise threads");
      initialised = true;
    }
    fftwf_plan_with_nthreads(n);
    fftw_plan_with_nthreads(n);
  }
  // Plans made before keep their old thread count; forget them (callers' handles stay valid).
  detail::forget_cached_plans();
}

}  // namespace spinflip::fft
