// FFTW3 wrappers: serial 2D/3D transforms on caller buffers, plans owned by one
// planner (src/fft), and FFTW3-MPI slab-decomposed 3D real fields. Conventions:
// forward is e^{-ik·x}, nothing is normalised (an inverse after a forward
// multiplies by N). Planning rigor and wisdom (shared so that every rank runs the
// same plan, DESIGN.md §3 and §11): fft/planning.hpp.
#pragma once
#include <mpi.h>

#include <array>
#include <complex>
#include <cstddef>
#include <memory>
#include <string>

namespace spinflip::fft {

using cfloat = std::complex<float>;
using cdouble = std::complex<double>;
enum class Direction { forward, inverse };

/// fftw_malloc'd storage (SIMD-aligned), move-only.
template <class T>
class Buffer {
 public:
  Buffer() = default;
  explicit Buffer(std::size_t n);
  Buffer(Buffer&& other) noexcept;
  Buffer& operator=(Buffer&& other) noexcept;
  Buffer(const Buffer&) = delete;
  Buffer& operator=(const Buffer&) = delete;
  ~Buffer();
  T* data() { return data_; }
  const T* data() const { return data_; }
  std::size_t size() const { return size_; }
  T& operator[](std::size_t i) { return data_[i]; }
  const T& operator[](std::size_t i) const { return data_[i]; }

 private:
  T* data_ = nullptr;
  std::size_t size_ = 0;
};

// Serial transforms. Plans are made once per (shape, kind, placement,
// alignment) by the one planner (fft/planning.hpp: rigor, wisdom) and reused;
// planning is thread-safe, execution is re-entrant. Planning never touches the
// caller's arrays (measured plans are timed on scratch of the same alignment).
// Buffers should come from Buffer<T> (aligned); in == out means in place
// (r2c in place needs rows padded to 2(n_last/2+1) reals). A c2r transform
// overwrites its input (FFTW's fast multi-dimensional c2r does), so it takes the
// input as a non-const `in_destroyed`.
void c2c_2d(std::size_t n0, std::size_t n1, const cfloat* in, cfloat* out, Direction d);
void c2c_2d(std::size_t n0, std::size_t n1, const cdouble* in, cdouble* out, Direction d);
void r2c_2d(std::size_t n0, std::size_t n1, const float* in, cfloat* out);    // out: n0 × (n1/2+1)
void r2c_2d(std::size_t n0, std::size_t n1, const double* in, cdouble* out);
void c2r_2d(std::size_t n0, std::size_t n1, cfloat* in_destroyed, float* out);
void c2r_2d(std::size_t n0, std::size_t n1, cdouble* in_destroyed, double* out);
void r2c_3d(const std::array<std::size_t, 3>& n, const float* in, cfloat* out);  // out: n0×n1×(n2/2+1)
void r2c_3d(const std::array<std::size_t, 3>& n, const double* in, cdouble* out);
void c2r_3d(const std::array<std::size_t, 3>& n, cfloat* in_destroyed, float* out);
void c2r_3d(const std::array<std::size_t, 3>& n, cdouble* in_destroyed, double* out);
void c2c_3d(const std::array<std::size_t, 3>& n, const cfloat* in, cfloat* out, Direction d);

/// 2D c2c of n0 × n1 values whose rows start in_pitch (out_pitch) elements apart,
/// pitch ≥ n1. A power-of-two row padded by a few elements keeps the column pass
/// out of a handful of cache sets: 256 × 256 float runs several times faster than
/// with contiguous rows under FFTW_ESTIMATE plans; with measured plans the two are
/// close (bench_stats prints both and divides by the faster).
void c2c_2d_pitched(std::size_t n0, std::size_t n1, const cfloat* in, std::size_t in_pitch, cfloat* out,
                    std::size_t out_pitch, Direction d);
/// `count` 1D c2c transforms of length n: element k of transform t is
/// in[t * in_dist + k * in_stride] (out likewise). in == out means in place.
void c2c_1d_batch(std::size_t n, std::size_t count, const cfloat* in, std::size_t in_stride, std::size_t in_dist,
                  cfloat* out, std::size_t out_stride, std::size_t out_dist, Direction d);

/// A plan of the one planner for repeated use on arrays laid out like those it was
/// made for (same alignment, same in-place-ness; checked, InternalError if not).
/// Copies share one FFTW plan, freed when the last copy goes: forgetting the
/// planner's plans (fft/planning.hpp) never frees a plan a caller still holds.
class Plan {
 public:
  Plan();
  ~Plan();
  Plan(const Plan&);
  Plan& operator=(const Plan&);
  void c2c(const cfloat* in, cfloat* out) const;
  void r2c(const float* in, cfloat* out) const;
  void c2r(cfloat* in_destroyed, float* out) const;
  struct Impl;

 private:
  explicit Plan(std::shared_ptr<const Impl> impl);
  std::shared_ptr<const Impl> impl_;
  friend struct Planner;
};

/// `count` 2D r2c (c2r) transforms of n0 × n1 reals: real element (i, j) of transform t
/// is at t·real_dist + i·real_pitch + j, mode (i, j) at t·complex_dist + i·complex_pitch + j
/// (j < n1/2 + 1); real == complex storage means in place.
Plan plan_r2c_2d_many(std::size_t n0, std::size_t n1, std::size_t count, const float* real, std::size_t real_pitch,
                      std::size_t real_dist, cfloat* complex, std::size_t complex_pitch, std::size_t complex_dist);
Plan plan_c2r_2d_many(std::size_t n0, std::size_t n1, std::size_t count, cfloat* complex, std::size_t complex_pitch,
                      std::size_t complex_dist, float* real, std::size_t real_pitch, std::size_t real_dist);
/// `count` 1D c2c transforms of length n, laid out as for c2c_1d_batch.
Plan plan_c2c_1d_many(std::size_t n, std::size_t count, const cfloat* in, std::size_t in_stride, std::size_t in_dist,
                      cfloat* out, std::size_t out_stride, std::size_t out_dist, Direction d);

/// Threads FFTW may use inside one transform (default 1: ranks do the parallelism).
void set_threads(int n);

/// A real 3D field of global shape n0 × n1 × n2 (axis 2 = line of sight),
/// stored for in-place r2c: this rank holds the slab [local_start0,
/// local_start0 + local_n0) of axis 0, rows padded to 2(n2/2+1) floats.
/// On MPI_COMM_SELF it is the whole box and uses serial FFTW; on a larger
/// communicator it uses FFTW-MPI. forward()/inverse() are collective on comm.
/// In Fourier space the local block is local_n0 × n1 × (n2/2+1) modes with
/// global axis-0 index local_start0 + i (FFTW-MPI non-transposed layout).
class SlabField {
 public:
  SlabField(const std::array<std::size_t, 3>& global_shape, MPI_Comm comm);
  SlabField(SlabField&&) noexcept;
  SlabField& operator=(SlabField&&) noexcept;
  ~SlabField();

  const std::array<std::size_t, 3>& global_shape() const;
  std::size_t local_n0() const;
  std::size_t local_start0() const;
  std::size_t padded_n2() const { return 2 * (global_shape()[2] / 2 + 1); }
  std::size_t half_n2() const { return global_shape()[2] / 2 + 1; }
  MPI_Comm comm() const;

  float& real(std::size_t i_local, std::size_t j, std::size_t k) {
    return real_data()[(i_local * global_shape()[1] + j) * padded_n2() + k];
  }
  float real(std::size_t i_local, std::size_t j, std::size_t k) const {
    return real_data()[(i_local * global_shape()[1] + j) * padded_n2() + k];
  }
  cfloat& mode(std::size_t i_local, std::size_t j, std::size_t k_half) {
    return complex_data()[(i_local * global_shape()[1] + j) * half_n2() + k_half];
  }
  float* real_data();
  const float* real_data() const;
  cfloat* complex_data();
  const cfloat* complex_data() const;
  std::size_t allocated_floats() const;  // for memory accounting

  void forward();  // real → Fourier, unnormalised
  void inverse();  // Fourier → real, unnormalised (divide by n0 n1 n2 yourself)
  void fill(float value);

 private:
  struct Impl;
  std::unique_ptr<Impl> impl_;
};

}  // namespace spinflip::fft
