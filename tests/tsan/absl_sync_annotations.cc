// ThreadSanitizer and Debian's Abseil: teaches TSan what absl::Mutex, absl::CondVar and
// absl::Notification do, for the `tsan` build only.
//
// Debian ships Abseil compiled without TSan, so the lock and unlock of an absl::Mutex (atomics and
// futexes inside libabsl_synchronization.so) are invisible to it, and every field guarded by a mutex
// would be reported as a race. Abseil's own TSan hooks are compiled in only when Abseil itself is
// built with TSan. This file defines the out-of-line synchronization members in the program, so
// that every call (ours, and through the PLT those of libabsl, libgpr and gRPC) comes here: each
// tells TSan about the operation with its mutex annotation interface (sanitizer/tsan_interface.h:
// __tsan_mutex_pre_lock, __tsan_mutex_post_lock, ...) and runs the library's own implementation,
// found with dlsym(RTLD_NEXT). Programs of the tsan build are linked with -rdynamic so that the
// libraries bind to these definitions.
#include <dlfcn.h>
#include <sanitizer/tsan_interface.h>

#include <atomic>
#include <cstdio>
#include <cstdlib>
#include <string>

#include "absl/synchronization/mutex.h"
#include "absl/synchronization/notification.h"
#include "absl/time/time.h"

namespace {

#define OGIVE_STRINGIZE_INNER(x) #x
#define OGIVE_STRINGIZE(x) OGIVE_STRINGIZE_INNER(x)

// The mangled name of absl::<inline namespace>::<rest>, e.g. Symbol("5Mutex4LockEv").
std::string Symbol(const char* rest) {
  const std::string inline_namespace = OGIVE_STRINGIZE(ABSL_OPTION_INLINE_NAMESPACE_NAME);
  return "_ZN4absl" + std::to_string(inline_namespace.size()) + inline_namespace + rest;
}

// The same for a const member function.
std::string ConstSymbol(const char* rest) {
  const std::string inline_namespace = OGIVE_STRINGIZE(ABSL_OPTION_INLINE_NAMESPACE_NAME);
  return "_ZNK4absl" + std::to_string(inline_namespace.size()) + inline_namespace + rest;
}

// The library's definition of the function whose mangled name is `name`.
template <typename Function>
Function Next(const std::string& name) {
  void* f = dlsym(RTLD_NEXT, name.c_str());
  if (f == nullptr) {
    std::fprintf(stderr, "absl_sync_annotations: %s not found in the libraries: %s\n", name.c_str(), dlerror());
    std::abort();
  }
  return reinterpret_cast<Function>(f);
}

// Declares `real`, the library's definition, found on first use.
#define OGIVE_NEXT(type, real, symbol) static const auto real = Next<type>(symbol)

constexpr unsigned kRead = __tsan_mutex_read_lock;

// The library's synchronization members call one another (AwaitWithTimeout calls AwaitWithDeadline,
// CondVar::Wait takes the mutex back, ...) through the PLT, so they come here too: only the
// outermost call on a thread is annotated.
thread_local int depth = 0;
struct Outermost {
  Outermost() { ++depth; }
  ~Outermost() { --depth; }
  bool operator()() const { return depth == 1; }
};

// An operation that releases `mu` for a while and takes it back (Await, CondVar::Wait): TSan sees
// an unlock and a lock; the library's code in between (which runs the caller's condition with the
// mutex held) is ignored.
template <typename Wait>
auto ReleasedWhile(void* mu, unsigned flags, Wait wait) {
  const Outermost outermost;
  if (!outermost()) return wait();
  __tsan_mutex_pre_unlock(mu, flags);
  auto result = wait();
  __tsan_mutex_post_unlock(mu, flags);
  __tsan_mutex_pre_lock(mu, flags);
  __tsan_mutex_post_lock(mu, flags, 0);
  return result;
}

// Taking `mu` (perhaps when a condition holds, perhaps with a time limit): `take` returns whether
// it was taken.
template <typename Take>
bool Taken(void* mu, unsigned flags, Take take) {
  const Outermost outermost;
  if (!outermost()) return take();
  __tsan_mutex_pre_lock(mu, flags | __tsan_mutex_try_lock);
  const bool taken = take();
  __tsan_mutex_post_lock(mu, flags | __tsan_mutex_try_lock | (taken ? 0 : __tsan_mutex_try_lock_failed), 0);
  return taken;
}

// Releasing `mu`.
template <typename Release>
void Released(void* mu, unsigned flags, Release release) {
  const Outermost outermost;
  if (!outermost()) return release();
  __tsan_mutex_pre_unlock(mu, flags);
  release();
  __tsan_mutex_post_unlock(mu, flags);
}

}  // namespace

namespace absl {
ABSL_NAMESPACE_BEGIN

void Mutex::Lock() {
  OGIVE_NEXT(void (*)(Mutex*), real, Symbol("5Mutex4LockEv"));
  Taken(this, 0, [&] { return real(this), true; });
}
void Mutex::ReaderLock() {
  OGIVE_NEXT(void (*)(Mutex*), real, Symbol("5Mutex10ReaderLockEv"));
  Taken(this, kRead, [&] { return real(this), true; });
}
bool Mutex::TryLock() {
  OGIVE_NEXT(bool (*)(Mutex*), real, Symbol("5Mutex7TryLockEv"));
  return Taken(this, 0, [&] { return real(this); });
}
bool Mutex::ReaderTryLock() {
  OGIVE_NEXT(bool (*)(Mutex*), real, Symbol("5Mutex13ReaderTryLockEv"));
  return Taken(this, kRead, [&] { return real(this); });
}
void Mutex::Unlock() {
  OGIVE_NEXT(void (*)(Mutex*), real, Symbol("5Mutex6UnlockEv"));
  Released(this, 0, [&] { real(this); });
}
void Mutex::ReaderUnlock() {
  OGIVE_NEXT(void (*)(Mutex*), real, Symbol("5Mutex12ReaderUnlockEv"));
  Released(this, kRead, [&] { real(this); });
}

void Mutex::LockWhen(const Condition& cond) {
  OGIVE_NEXT(void (*)(Mutex*, const Condition&), real, Symbol("5Mutex8LockWhenERKNS0_9ConditionE"));
  Taken(this, 0, [&] { return real(this, cond), true; });
}
void Mutex::ReaderLockWhen(const Condition& cond) {
  OGIVE_NEXT(void (*)(Mutex*, const Condition&), real, Symbol("5Mutex14ReaderLockWhenERKNS0_9ConditionE"));
  Taken(this, kRead, [&] { return real(this, cond), true; });
}
// The timed forms hold the mutex on return whatever they return.
bool Mutex::LockWhenWithTimeout(const Condition& cond, absl::Duration timeout) {
  OGIVE_NEXT(bool (*)(Mutex*, const Condition&, absl::Duration), real,
             Symbol("5Mutex19LockWhenWithTimeoutERKNS0_9ConditionENS0_8DurationE"));
  bool result = false;
  Taken(this, 0, [&] { return result = real(this, cond, timeout), true; });
  return result;
}
bool Mutex::LockWhenWithDeadline(const Condition& cond, absl::Time deadline) {
  OGIVE_NEXT(bool (*)(Mutex*, const Condition&, absl::Time), real,
             Symbol("5Mutex20LockWhenWithDeadlineERKNS0_9ConditionENS0_4TimeE"));
  bool result = false;
  Taken(this, 0, [&] { return result = real(this, cond, deadline), true; });
  return result;
}
bool Mutex::ReaderLockWhenWithTimeout(const Condition& cond, absl::Duration timeout) {
  OGIVE_NEXT(bool (*)(Mutex*, const Condition&, absl::Duration), real,
             Symbol("5Mutex25ReaderLockWhenWithTimeoutERKNS0_9ConditionENS0_8DurationE"));
  bool result = false;
  Taken(this, kRead, [&] { return result = real(this, cond, timeout), true; });
  return result;
}
bool Mutex::ReaderLockWhenWithDeadline(const Condition& cond, absl::Time deadline) {
  OGIVE_NEXT(bool (*)(Mutex*, const Condition&, absl::Time), real,
             Symbol("5Mutex26ReaderLockWhenWithDeadlineERKNS0_9ConditionENS0_4TimeE"));
  bool result = false;
  Taken(this, kRead, [&] { return result = real(this, cond, deadline), true; });
  return result;
}

void Mutex::Await(const Condition& cond) {
  OGIVE_NEXT(void (*)(Mutex*, const Condition&), real, Symbol("5Mutex5AwaitERKNS0_9ConditionE"));
  ReleasedWhile(this, 0, [&] { return real(this, cond), true; });
}
bool Mutex::AwaitWithTimeout(const Condition& cond, absl::Duration timeout) {
  OGIVE_NEXT(bool (*)(Mutex*, const Condition&, absl::Duration), real,
             Symbol("5Mutex16AwaitWithTimeoutERKNS0_9ConditionENS0_8DurationE"));
  return ReleasedWhile(this, 0, [&] { return real(this, cond, timeout); });
}
bool Mutex::AwaitWithDeadline(const Condition& cond, absl::Time deadline) {
  OGIVE_NEXT(bool (*)(Mutex*, const Condition&, absl::Time), real,
             Symbol("5Mutex17AwaitWithDeadlineERKNS0_9ConditionENS0_4TimeE"));
  return ReleasedWhile(this, 0, [&] { return real(this, cond, deadline); });
}

void CondVar::Wait(Mutex* mu) {
  OGIVE_NEXT(void (*)(CondVar*, Mutex*), real, Symbol("7CondVar4WaitEPNS0_5MutexE"));
  ReleasedWhile(mu, 0, [&] { return real(this, mu), true; });
}
bool CondVar::WaitWithTimeout(Mutex* mu, absl::Duration timeout) {
  OGIVE_NEXT(bool (*)(CondVar*, Mutex*, absl::Duration), real,
             Symbol("7CondVar15WaitWithTimeoutEPNS0_5MutexENS0_8DurationE"));
  return ReleasedWhile(mu, 0, [&] { return real(this, mu, timeout); });
}
bool CondVar::WaitWithDeadline(Mutex* mu, absl::Time deadline) {
  OGIVE_NEXT(bool (*)(CondVar*, Mutex*, absl::Time), real,
             Symbol("7CondVar16WaitWithDeadlineEPNS0_5MutexENS0_4TimeE"));
  return ReleasedWhile(mu, 0, [&] { return real(this, mu, deadline); });
}

// Notify takes the notification's own mutex (through Mutex::Lock above) and sets its flag: a
// release on the flag's address, which the waits below, and HasBeenNotified() (inline, so in
// instrumented code, an acquire load of the flag), acquire. The library's waits return at once,
// without the mutex, when the flag is already set.
void* NotifiedFlag(const Notification* n) {
  static_assert(sizeof(Notification) >= sizeof(Mutex) + sizeof(std::atomic<bool>),
                "absl::Notification is a Mutex and then its flag");
  return const_cast<char*>(reinterpret_cast<const char*>(n)) + sizeof(Mutex);
}
void Notification::Notify() {
  OGIVE_NEXT(void (*)(Notification*), real, Symbol("12Notification6NotifyEv"));
  __tsan_release(NotifiedFlag(this));
  real(this);
}
void Notification::WaitForNotification() const {
  OGIVE_NEXT(void (*)(const Notification*), real, ConstSymbol("12Notification19WaitForNotificationEv"));
  real(this);
  __tsan_acquire(NotifiedFlag(this));
}
bool Notification::WaitForNotificationWithTimeout(absl::Duration timeout) const {
  OGIVE_NEXT(bool (*)(const Notification*, absl::Duration), real,
             ConstSymbol("12Notification30WaitForNotificationWithTimeoutENS0_8DurationE"));
  const bool notified = real(this, timeout);
  if (notified) __tsan_acquire(NotifiedFlag(this));
  return notified;
}
bool Notification::WaitForNotificationWithDeadline(absl::Time deadline) const {
  OGIVE_NEXT(bool (*)(const Notification*, absl::Time), real,
             ConstSymbol("12Notification31WaitForNotificationWithDeadlineENS0_4TimeE"));
  const bool notified = real(this, deadline);
  if (notified) __tsan_acquire(NotifiedFlag(this));
  return notified;
}

ABSL_NAMESPACE_END
}  // namespace absl
