// function_ref.h — a non-owning reference to a callable, for "call this now" parameters.
// Unlike std::function it never allocates (a lambda capturing more than two pointers
// sends std::function to the heap), so passing work to the thread pool costs nothing.
// The callable (a lambda or function object) must outlive the call it is passed to, as a
// lambda argument always does.
//   void each(FunctionRef<void(int)> fn);   each([&](int i) { sum += i; });
#pragma once
#include <type_traits>
#include <utility>

namespace tessera::quant {

template <class Signature>
class FunctionRef;

template <class R, class... Args>
class FunctionRef<R(Args...)> {
 public:
  template <class F, class = std::enable_if_t<!std::is_same_v<std::decay_t<F>, FunctionRef> &&
                                              std::is_invocable_r_v<R, F&, Args...>>>
  FunctionRef(F&& f) noexcept  // NOLINT: implicit, like std::function
      : object_(const_cast<void*>(static_cast<const void*>(std::addressof(f)))),
        call_([](void* o, Args... args) -> R {
          auto& f = *static_cast<std::remove_reference_t<F>*>(o);
          if constexpr (std::is_void_v<R>)
            f(std::forward<Args>(args)...);  // a result, if any, is dropped (as std::function does)
          else
            return f(std::forward<Args>(args)...);
        }) {}

  R operator()(Args... args) const { return call_(object_, std::forward<Args>(args)...); }

 private:
  void* object_;
  R (*call_)(void*, Args...);
};

}  // namespace tessera::quant
