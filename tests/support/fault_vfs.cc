#include "tests/support/fault_vfs.h"

#include <sqlite3.h>

#include <cstddef>
#include <map>
#include <utility>

#include "absl/time/clock.h"
#include "server/base/check.h"

namespace ogive::testing {
namespace {

// The handle SQLite allocates for each open file (sqlite3_vfs::szOsFile bytes): our header, then the
// default VFS's own handle.
struct Handle {
  sqlite3_file base;  // must be first: SQLite sees a sqlite3_file*
  FaultVfs* vfs;
  FaultFile role;
  sqlite3_file* real;  // points just past this header, inside the same allocation
};

constexpr size_t kHeaderBytes = (sizeof(Handle) + 7) & ~size_t{7};

Handle* Of(sqlite3_file* file) { return reinterpret_cast<Handle*>(file); }
sqlite3_file* Real(sqlite3_file* file) { return Of(file)->real; }
const sqlite3_io_methods* RealMethods(sqlite3_file* file) { return Real(file)->pMethods; }

int Close(sqlite3_file* file) { return RealMethods(file)->xClose(Real(file)); }
int Read(sqlite3_file* file, void* buffer, int amount, sqlite3_int64 offset) {
  return RealMethods(file)->xRead(Real(file), buffer, amount, offset);
}
int Write(sqlite3_file* file, const void* buffer, int amount, sqlite3_int64 offset) {
  if (const int rc = Of(file)->vfs->Decide(FaultOp::kWrite, Of(file)->role); rc != 0) return rc;
  return RealMethods(file)->xWrite(Real(file), buffer, amount, offset);
}
int Truncate(sqlite3_file* file, sqlite3_int64 size) {
  if (const int rc = Of(file)->vfs->Decide(FaultOp::kTruncate, Of(file)->role); rc != 0) return rc;
  return RealMethods(file)->xTruncate(Real(file), size);
}
int Sync(sqlite3_file* file, int flags) {
  if (const int rc = Of(file)->vfs->Decide(FaultOp::kSync, Of(file)->role); rc != 0) return rc;
  return RealMethods(file)->xSync(Real(file), flags);
}
int FileSize(sqlite3_file* file, sqlite3_int64* size) {
  return RealMethods(file)->xFileSize(Real(file), size);
}
int Lock(sqlite3_file* file, int level) { return RealMethods(file)->xLock(Real(file), level); }
int Unlock(sqlite3_file* file, int level) { return RealMethods(file)->xUnlock(Real(file), level); }
int CheckReservedLock(sqlite3_file* file, int* out) {
  return RealMethods(file)->xCheckReservedLock(Real(file), out);
}
int FileControl(sqlite3_file* file, int op, void* arg) {
  return RealMethods(file)->xFileControl(Real(file), op, arg);
}
int SectorSize(sqlite3_file* file) { return RealMethods(file)->xSectorSize(Real(file)); }
int DeviceCharacteristics(sqlite3_file* file) {
  return RealMethods(file)->xDeviceCharacteristics(Real(file));
}
int ShmMap(sqlite3_file* file, int region, int size, int extend, void volatile** out) {
  return RealMethods(file)->xShmMap(Real(file), region, size, extend, out);
}
int ShmLock(sqlite3_file* file, int offset, int n, int flags) {
  return RealMethods(file)->xShmLock(Real(file), offset, n, flags);
}
void ShmBarrier(sqlite3_file* file) { RealMethods(file)->xShmBarrier(Real(file)); }
int ShmUnmap(sqlite3_file* file, int delete_flag) {
  return RealMethods(file)->xShmUnmap(Real(file), delete_flag);
}
int Fetch(sqlite3_file* file, sqlite3_int64 offset, int amount, void** out) {
  return RealMethods(file)->xFetch(Real(file), offset, amount, out);
}
int Unfetch(sqlite3_file* file, sqlite3_int64 offset, void* page) {
  return RealMethods(file)->xUnfetch(Real(file), offset, page);
}

// Version 3, like the unix VFS's own files (shared memory for WAL, memory-mapped reads).
const sqlite3_io_methods kMethods = {
    3,        Close,       Read,       Write,        Truncate, Sync,   FileSize,
    Lock,     Unlock,      CheckReservedLock,        FileControl,      SectorSize,
    DeviceCharacteristics, ShmMap,     ShmLock,      ShmBarrier,       ShmUnmap,
    Fetch,    Unfetch,
};

// What a registered FaultVfs's sqlite3_vfs::pAppData points at.
struct VfsData {
  FaultVfs* owner;
  sqlite3_vfs* base;  // SQLite's default VFS at registration
};

sqlite3_vfs* Base(sqlite3_vfs* vfs) { return static_cast<VfsData*>(vfs->pAppData)->base; }
FaultVfs* Owner(sqlite3_vfs* vfs) { return static_cast<VfsData*>(vfs->pAppData)->owner; }

int Open(sqlite3_vfs* vfs, const char* name, sqlite3_file* file, int flags, int* out_flags) {
  Handle* handle = Of(file);
  handle->vfs = Owner(vfs);
  handle->role = (flags & SQLITE_OPEN_MAIN_DB) != 0 ? FaultFile::kMainDb
                 : (flags & SQLITE_OPEN_WAL) != 0   ? FaultFile::kWal
                                                    : FaultFile::kAny;
  handle->real = reinterpret_cast<sqlite3_file*>(reinterpret_cast<char*>(file) + kHeaderBytes);
  handle->real->pMethods = nullptr;
  const int rc = Base(vfs)->xOpen(Base(vfs), name, handle->real, flags, out_flags);
  // SQLite calls xClose whenever pMethods is set, even after a failed open; mirror the real handle.
  if (handle->real->pMethods != nullptr) {
    OGIVE_CHECK(handle->real->pMethods->iVersion >= 3);
    handle->base.pMethods = &kMethods;
  } else {
    handle->base.pMethods = nullptr;
  }
  return rc;
}

int Delete(sqlite3_vfs* vfs, const char* name, int sync_dir) {
  return Base(vfs)->xDelete(Base(vfs), name, sync_dir);
}
int Access(sqlite3_vfs* vfs, const char* name, int flags, int* out) {
  return Base(vfs)->xAccess(Base(vfs), name, flags, out);
}
int FullPathname(sqlite3_vfs* vfs, const char* name, int size, char* out) {
  return Base(vfs)->xFullPathname(Base(vfs), name, size, out);
}
void* DlOpen(sqlite3_vfs* vfs, const char* name) { return Base(vfs)->xDlOpen(Base(vfs), name); }
void DlError(sqlite3_vfs* vfs, int size, char* out) { Base(vfs)->xDlError(Base(vfs), size, out); }
void (*DlSym(sqlite3_vfs* vfs, void* library, const char* symbol))(void) {
  return Base(vfs)->xDlSym(Base(vfs), library, symbol);
}
void DlClose(sqlite3_vfs* vfs, void* library) { Base(vfs)->xDlClose(Base(vfs), library); }
int Randomness(sqlite3_vfs* vfs, int size, char* out) {
  return Base(vfs)->xRandomness(Base(vfs), size, out);
}
int Sleep(sqlite3_vfs* vfs, int microseconds) { return Base(vfs)->xSleep(Base(vfs), microseconds); }
int CurrentTime(sqlite3_vfs* vfs, double* out) { return Base(vfs)->xCurrentTime(Base(vfs), out); }
int GetLastError(sqlite3_vfs* vfs, int size, char* out) {
  return Base(vfs)->xGetLastError(Base(vfs), size, out);
}
int CurrentTimeInt64(sqlite3_vfs* vfs, sqlite3_int64* out) {
  return Base(vfs)->xCurrentTimeInt64(Base(vfs), out);
}
int SetSystemCall(sqlite3_vfs* vfs, const char* name, sqlite3_syscall_ptr call) {
  return Base(vfs)->xSetSystemCall(Base(vfs), name, call);
}
sqlite3_syscall_ptr GetSystemCall(sqlite3_vfs* vfs, const char* name) {
  return Base(vfs)->xGetSystemCall(Base(vfs), name);
}
const char* NextSystemCall(sqlite3_vfs* vfs, const char* name) {
  return Base(vfs)->xNextSystemCall(Base(vfs), name);
}

int FileIndex(FaultFile file) { return static_cast<int>(file); }

}  // namespace

FaultVfs& FaultVfs::Get(const std::string& name) {
  static absl::Mutex mu(absl::kConstInit);
  // Leaked on purpose: SQLite keeps pointers to every registered VFS until the process ends.
  static auto* registered = new std::map<std::string, FaultVfs*>();
  absl::MutexLock lock(&mu);
  if (auto it = registered->find(name); it != registered->end()) return *it->second;

  OGIVE_CHECK(sqlite3_initialize() == SQLITE_OK);
  sqlite3_vfs* base = sqlite3_vfs_find(nullptr);
  OGIVE_CHECK(base != nullptr && base->iVersion >= 3);
  auto* fault = new FaultVfs(name);
  auto* app_data = new VfsData{fault, base};
  auto* vfs = new sqlite3_vfs(*base);
  vfs->iVersion = 3;
  vfs->szOsFile = static_cast<int>(kHeaderBytes) + base->szOsFile;
  vfs->pNext = nullptr;
  vfs->zName = fault->name_.c_str();
  vfs->pAppData = app_data;
  vfs->xOpen = Open;
  vfs->xDelete = Delete;
  vfs->xAccess = Access;
  vfs->xFullPathname = FullPathname;
  vfs->xDlOpen = DlOpen;
  vfs->xDlError = DlError;
  vfs->xDlSym = DlSym;
  vfs->xDlClose = DlClose;
  vfs->xRandomness = Randomness;
  vfs->xSleep = Sleep;
  vfs->xCurrentTime = CurrentTime;
  vfs->xGetLastError = GetLastError;
  vfs->xCurrentTimeInt64 = CurrentTimeInt64;
  vfs->xSetSystemCall = SetSystemCall;
  vfs->xGetSystemCall = GetSystemCall;
  vfs->xNextSystemCall = NextSystemCall;
  OGIVE_CHECK(sqlite3_vfs_register(vfs, /*makeDflt=*/0) == SQLITE_OK);
  registered->emplace(name, fault);
  return *fault;
}

FaultVfs::FaultVfs(std::string name) : name_(std::move(name)) {}

void FaultVfs::Arm(const FaultRule& rule) {
  OGIVE_CHECK((rule.error != SQLITE_OK || rule.delay > absl::ZeroDuration()) && rule.after >= 0 &&
              (rule.times >= 0 || rule.times == FaultRule::kForever));
  absl::MutexLock lock(&mu_);
  armed_ = true;
  rule_ = rule;
  matched_ = 0;
  injected_ = 0;
}

void FaultVfs::Clear() {
  absl::MutexLock lock(&mu_);
  armed_ = false;
}

int64_t FaultVfs::matched() const {
  absl::MutexLock lock(&mu_);
  return matched_;
}

int64_t FaultVfs::injected() const {
  absl::MutexLock lock(&mu_);
  return injected_;
}

int64_t FaultVfs::calls(FaultOp op, FaultFile file) const {
  return calls_[static_cast<int>(op)][FileIndex(file)].load();
}

int FaultVfs::Decide(FaultOp op, FaultFile file) {
  calls_[static_cast<int>(op)][FileIndex(file)].fetch_add(1);
  absl::Duration delay;
  {
    absl::MutexLock lock(&mu_);
    if (!armed_ || rule_.op != op || (rule_.file != FaultFile::kAny && rule_.file != file)) return 0;
    ++matched_;
    if (matched_ <= rule_.after) return 0;
    if (rule_.times != FaultRule::kForever && matched_ > rule_.after + rule_.times) return 0;
    ++injected_;
    if (rule_.error != 0) return rule_.error;
    delay = rule_.delay;
  }
  absl::SleepFor(delay);  // outside the lock: other files go on meanwhile
  return 0;
}

}  // namespace ogive::testing
