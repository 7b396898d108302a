// safetensors.h — read and write safetensors files (the model and the training state).
// Format (safetensors README, section "Format", github.com/huggingface/safetensors):
//   8 bytes   N, the header length, unsigned little-endian 64-bit
//   N bytes   a UTF-8 JSON object beginning with '{', optionally padded with spaces:
//             {"<name>": {"dtype": "F32", "shape": [2, 3], "data_offsets": [begin, end]}, ...,
//              "__metadata__": {"<key>": "<string value>", ...}}
//   the rest  the data block; offsets are relative to its start, end is one past the last
//             byte; data are little-endian and row-major; the tensors tile the block
//             exactly (no holes, no overlap); rank-0 and zero-size tensors are allowed.
// Our writer pads the header to a multiple of 8 bytes (common practice) and packs the
// tensors in the order they were added. The reader trusts nothing in the file.
#pragma once
#include <bit>
#include <cstddef>
#include <cstdint>
#include <cstring>
#include <functional>
#include <map>
#include <set>
#include <memory>
#include <span>
#include <string>
#include <string_view>
#include <vector>

namespace tessera::quant {

static_assert(std::endian::native == std::endian::little, "tensor data is little-endian");

// All the byte-sized element types of the format. Typed access (get<T>) covers the integer
// and IEEE types; BOOL, F16, BF16 and the 8-bit floats are reachable as raw bytes only.
enum class Dtype : std::uint8_t {
  boolean, u8, i8, f8_e5m2, f8_e4m3, u16, i16, f16, bf16, u32, i32, f32, u64, i64, f64 };
std::string_view dtype_name(Dtype d);   // the format's spelling: "F32", "I64", "BOOL", ...
std::size_t dtype_size(Dtype d);        // bytes per element

template <class T> constexpr Dtype dtype_of();
template <> constexpr Dtype dtype_of<std::uint8_t>() { return Dtype::u8; }
template <> constexpr Dtype dtype_of<std::int8_t>() { return Dtype::i8; }
template <> constexpr Dtype dtype_of<std::uint16_t>() { return Dtype::u16; }
template <> constexpr Dtype dtype_of<std::int16_t>() { return Dtype::i16; }
template <> constexpr Dtype dtype_of<std::uint32_t>() { return Dtype::u32; }
template <> constexpr Dtype dtype_of<std::int32_t>() { return Dtype::i32; }
template <> constexpr Dtype dtype_of<float>() { return Dtype::f32; }
template <> constexpr Dtype dtype_of<std::uint64_t>() { return Dtype::u64; }
template <> constexpr Dtype dtype_of<std::int64_t>() { return Dtype::i64; }
template <> constexpr Dtype dtype_of<double>() { return Dtype::f64; }

using Shape = std::vector<std::int64_t>;
std::string shape_string(std::span<const std::int64_t> shape);   // "[256, 80, 7]"

struct TensorInfo {
  std::string name;
  Dtype dtype = Dtype::f32;
  Shape shape;
  std::uint64_t begin = 0, end = 0;   // byte range inside the data block
  std::int64_t numel() const;          // product of the shape (1 for rank 0)
};

// Collects tensors and metadata, then writes one file atomically (audio/atomic_file.h).
// The writer keeps pointers, not copies: every `data` must stay valid until write().
//   SafetensorsWriter w;
//   w.add("enc.0.w", {256, 80, 7}, weights.data());
//   w.set_metadata("model_id", w.content_id());
//   w.write("model.safetensors");
class SafetensorsWriter {
 public:
  // `data` holds numel(shape)·dtype_size(dtype) bytes. Throws tessera::Error on a duplicate
  // or reserved name or a negative dimension.
  void add(std::string name, Dtype dtype, Shape shape, const void* data);
  template <class T>
  void add(std::string name, Shape shape, const T* data) {
    add(std::move(name), dtype_of<T>(), std::move(shape), data);
  }
  void set_metadata(std::string key, std::string value);   // replaces an existing key

  const std::vector<TensorInfo>& tensors() const { return tensors_; }
  std::string content_id() const;            // see tensor_content_id() below
  void write(const std::string& path) const; // throws tessera::Error on I/O failure

 private:
  std::vector<TensorInfo> tensors_;
  std::vector<const void*> data_;
  std::set<std::string, std::less<>> names_;
  std::map<std::string, std::string> metadata_;
  std::uint64_t data_size_ = 0;
};

// Reads and validates a whole file into memory. Every problem is a tessera::Error that
// names the file and what is wrong, e.g.
//   "model.safetensors: tensor 'enc.0.w': expected shape [256, 80, 7], got [256, 80, 5]".
//   SafetensorsReader r("model.safetensors");
//   std::vector<float> w = r.get<float>("enc.0.w", {256, 80, 7});
//   r.read_into<float>("enc.0.b", {256}, slab + offset);   // straight into a parameter slab
class SafetensorsReader {
 public:
  static constexpr std::uint64_t kMaxHeaderBytes = 100'000'000;   // the README's 100 MB limit
  static constexpr std::size_t kMaxRank = 64;                     // ours; no real tensor is near

  explicit SafetensorsReader(std::string path);
  // The same reader over a file already in memory; `name` stands for its path in messages.
  SafetensorsReader(std::string name, std::string_view bytes);

  const std::string& path() const { return path_; }
  const std::vector<TensorInfo>& tensors() const { return tensors_; }   // in data-block order
  const std::map<std::string, std::string, std::less<>>& metadata() const { return metadata_; }
  bool has(std::string_view name) const { return index_.count(name) != 0; }
  const TensorInfo& info(std::string_view name) const;              // throws if absent
  const std::string& metadata_at(std::string_view key) const;       // throws if absent
  std::span<const std::byte> bytes(std::string_view name) const;    // raw, any dtype
  std::string content_id() const;                                   // see tensor_content_id()

  // Typed copies; the dtype must match T exactly, and the shape when given.
  template <class T>
  std::vector<T> get(std::string_view name) const {
    const TensorInfo& t = checked(name, dtype_of<T>(), nullptr);
    return copy_out<T>(t);
  }
  template <class T>
  std::vector<T> get(std::string_view name, const Shape& shape) const {
    const TensorInfo& t = checked(name, dtype_of<T>(), &shape);
    return copy_out<T>(t);
  }
  // Copies into caller memory that holds numel(shape) elements; allocates nothing.
  template <class T>
  void read_into(std::string_view name, const Shape& shape, T* dst) const {
    const TensorInfo& t = checked(name, dtype_of<T>(), &shape);
    if (t.end > t.begin) std::memcpy(dst, data_.get() + t.begin, t.end - t.begin);
  }

 private:
  // read_exact(dst, n, what) copies the next n bytes of the input or throws.
  using ReadExact = std::function<void(void*, std::uint64_t, const char*)>;
  void load(std::uint64_t size, const ReadExact& read_exact);   // the parser, for both sources
  const TensorInfo& checked(std::string_view name, Dtype dtype, const Shape* shape) const;
  template <class T>
  std::vector<T> copy_out(const TensorInfo& t) const {
    std::vector<T> v(std::size_t(t.numel()));
    if (t.end > t.begin) std::memcpy(v.data(), data_.get() + t.begin, t.end - t.begin);
    return v;
  }

  std::string path_;
  std::vector<TensorInfo> tensors_;
  std::map<std::string, std::size_t, std::less<>> index_;   // name -> position in tensors_
  std::map<std::string, std::string, std::less<>> metadata_;
  std::unique_ptr<std::byte[]> data_;                       // the data block
  std::uint64_t data_size_ = 0;
};

// A model id: the first 16 hex digits of SHA-256 (quant/hash.h) over, per tensor in data
// order, its name, dtype name and shape (each followed by a 0 byte) and then its bytes.
// Metadata are left out, so the id can be stored in the metadata it identifies.
std::string tensor_content_id(std::span<const TensorInfo> tensors,
                              std::span<const void* const> data);

}  // namespace tessera::quant
