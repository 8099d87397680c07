// Store: the SQLite log (schemas/store.sql). One connection, statements prepared once at open,
// every SQLite failure turned into Status::IoError by SqliteError below.
#include "rimwatch/daemon/store.h"

#include <fcntl.h>
#include <pthread.h>
#include <sqlite3.h>
#include <sys/eventfd.h>
#include <sys/stat.h>
#include <unistd.h>

#include <array>
#include <atomic>
#include <cerrno>
#include <cmath>
#include <condition_variable>
#include <cstring>
#include <limits>
#include <memory>
#include <mutex>
#include <string>
#include <thread>
#include <type_traits>
#include <unordered_map>

#include "store_ddl.h"

namespace rimwatch::daemon {
namespace {

// Schema upgrades, oldest first: kMigrations[i] takes a file from version i + 1 to i + 2, inside
// the transaction that opens the file. schemas/store.sql always holds the newest schema (a new
// file runs it and is stamped with CurrentSchemaVersion()), so adding version N+1 means: change
// store.sql, and append the SQL that turns a version N file into exactly that schema.
struct Migration {
  const char* what;  // for the error message
  const char* sql;
};
constexpr std::array<Migration, 1> kMigrations{{
    {"models.recorded_inputs: how many input rows of a model have their records written",
     "ALTER TABLE models ADD COLUMN recorded_inputs INTEGER CHECK (recorded_inputs >= 0)"},
}};

Status SqliteError(sqlite3* db, std::string_view what) {
  std::string msg = "store: ";
  msg.append(what);
  msg += ": ";
  msg += db != nullptr ? sqlite3_errmsg(db) : "out of memory";
  return Status::IoError(std::move(msg));
}

// Resets a cached statement when the call that used it returns, whatever the path.
class StatementUse {
 public:
  explicit StatementUse(sqlite3_stmt* s) : s_(s) {}
  ~StatementUse() { sqlite3_reset(s_); }
  StatementUse(const StatementUse&) = delete;
  StatementUse& operator=(const StatementUse&) = delete;
  sqlite3_stmt* get() const { return s_; }

 private:
  sqlite3_stmt* s_;
};

// Text is bound with SQLITE_STATIC: the strings outlive the step that reads them.
int BindText(sqlite3_stmt* s, int i, std::string_view text) {
  return sqlite3_bind_text(s, i, text.data(), static_cast<int>(text.size()), SQLITE_STATIC);
}
int BindOptionalText(sqlite3_stmt* s, int i, const std::string& text) {
  return text.empty() ? sqlite3_bind_null(s, i) : BindText(s, i, text);
}
int BindOptionalDouble(sqlite3_stmt* s, int i, const std::optional<double>& v) {
  return v ? sqlite3_bind_double(s, i, *v) : sqlite3_bind_null(s, i);
}
std::string ColumnText(sqlite3_stmt* s, int i) {
  const unsigned char* p = sqlite3_column_text(s, i);
  return p == nullptr ? std::string()
                      : std::string(reinterpret_cast<const char*>(p),
                                    static_cast<std::size_t>(sqlite3_column_bytes(s, i)));
}
double ColumnDoubleOrNan(sqlite3_stmt* s, int i) {
  return sqlite3_column_type(s, i) == SQLITE_NULL ? std::numeric_limits<double>::quiet_NaN()
                                                  : sqlite3_column_double(s, i);
}

bool SameBits(double a, double b) { return std::memcmp(&a, &b, sizeof a) == 0; }

// Every statement the store runs after open, prepared once.
enum Sql : int {
  kBegin,
  kCommit,
  kRollback,
  kFindSeries,
  kSeriesById,
  kSeriesLatest,
  kInsertSeries,
  kLatestVintage,
  kInsertObservation,
  kLoadSeries,
  kCountObservations,
  kFindActiveModel,
  kInsertModel,
  kDropModel,
  kActiveModels,
  kSetRecordedInputs,
  kModelIds,
  kInsertTest,
  kInsertSnapshot,
  kInsertAlert,
  kDeleteTestsAfter,
  kDeleteSnapshotsAfter,
  kLoadAlerts,
  kMaxTestRow,
  kMaxSnapshotRow,
  kPruneTests,
  kPruneSnapshots,
  kIntegrityCheck,
  kSqlCount
};

constexpr const char* kSqlText[kSqlCount] = {
    "BEGIN IMMEDIATE",
    "COMMIT",
    "ROLLBACK",
    "SELECT id, period_kind FROM series WHERE name = ?1",
    "SELECT name, period_kind FROM series WHERE id = ?1",
    "SELECT MAX(period_key) FROM observations WHERE series_id = ?1",
    "INSERT INTO series (name, period_kind) VALUES (?1, ?2)",
    "SELECT vintage, value FROM observations WHERE series_id = ?1 AND period_key = ?2 "
    "ORDER BY vintage DESC LIMIT 1",
    "INSERT INTO observations (series_id, period_key, period_text, vintage, value, released_at, "
    "received_at) VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7)",
    "SELECT period_key, period_text, vintage, value FROM observations WHERE series_id = ?1 "
    "ORDER BY period_key, vintage",
    "SELECT COUNT(*) FROM observations",
    "SELECT id FROM models WHERE name = ?1 AND dropped_at IS NULL",
    "INSERT INTO models (name, spec_text, added_at) VALUES (?1, ?2, ?3)",
    "UPDATE models SET dropped_at = ?2 WHERE name = ?1 AND dropped_at IS NULL",
    "SELECT id, name, spec_text, added_at, recorded_inputs FROM models WHERE dropped_at IS NULL "
    "ORDER BY id",
    "UPDATE models SET recorded_inputs = ?2 WHERE id = ?1",
    "SELECT id FROM models ORDER BY id",
    "INSERT INTO tests (model_id, row, period, rho, rho_se, payload) "
    "VALUES (?1, ?2, ?3, ?4, ?5, ?6)",
    "INSERT INTO snapshots (model_id, row, period, payload) VALUES (?1, ?2, ?3, ?4)",
    "INSERT INTO alerts (model_id, row, period, monitor, transition, level, statistic, threshold, "
    "message, recorded_at) VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10)",
    "DELETE FROM tests WHERE model_id = ?1 AND row > ?2",
    "DELETE FROM snapshots WHERE model_id = ?1 AND row > ?2",
    "SELECT a.row, a.period, m.name, a.monitor, a.transition, a.level, a.statistic, a.threshold, "
    "a.message FROM alerts a JOIN models m ON m.id = a.model_id WHERE a.model_id = ?1 "
    "ORDER BY a.id",
    "SELECT MAX(row) FROM tests WHERE model_id = ?1",
    "SELECT MAX(row) FROM snapshots WHERE model_id = ?1",
    "DELETE FROM tests WHERE model_id = ?1 AND row <= ?2",
    "DELETE FROM snapshots WHERE model_id = ?1 AND row <= ?2",
    "PRAGMA integrity_check",
};

struct SeriesState {
  std::string name;
  PeriodKind kind = PeriodKind::kInteger;
  std::optional<std::int64_t> latest_key;
};

std::string KindMismatch(const std::string& name, PeriodKind held, const Period& got) {
  return "series " + name + " holds " + std::string(PeriodKindName(held)) + " periods, got " +
         std::string(PeriodKindName(got.kind)) + " period " + FormatPeriod(got.kind, got.key);
}

}  // namespace

// Copies committed WAL frames into the database file from a second connection on its own
// thread, so the writer's commits never run a checkpoint (SQLite's automatic one runs inside the
// commit that crosses 1,000 frames and was a third of rimwatchd's commit path). PASSIVE mode
// never blocks the writer or readers; the WAL restarts from its beginning once a checkpoint has
// copied every frame. The writer's commit hook wakes the thread after `kFrames` new frames.
class Checkpointer {
 public:
  static constexpr int kFrames = 1000;  // SQLite's default automatic checkpoint size

  // Opens the second connection; false (nothing started) if that fails.
  bool Start(const std::string& path, int busy_timeout_ms) {
    if (sqlite3_open_v2(path.c_str(), &db_, SQLITE_OPEN_READWRITE | SQLITE_OPEN_NOMUTEX, nullptr) !=
        SQLITE_OK) {
      sqlite3_close(db_);
      db_ = nullptr;
      return false;
    }
    sqlite3_busy_timeout(db_, busy_timeout_ms);
    thread_ = std::thread([this] {
      pthread_setname_np(pthread_self(), "rw-checkpoint");
      Loop();
    });
    return true;
  }
  ~Checkpointer() {
    if (!thread_.joinable()) return;
    {
      std::lock_guard<std::mutex> lock(mutex_);
      stop_ = true;
    }
    wake_.notify_one();
    thread_.join();
    sqlite3_close(db_);
  }
  // The writer's wal hook: frames = WAL frames after its commit.
  static int Hook(void* self, sqlite3*, const char*, int frames) {
    auto* c = static_cast<Checkpointer*>(self);
    if (frames >= kFrames) {
      {
        std::lock_guard<std::mutex> lock(c->mutex_);
        c->due_ = true;
      }
      c->wake_.notify_one();
    }
    return SQLITE_OK;
  }

 private:
  void Loop() {
    std::unique_lock<std::mutex> lock(mutex_);
    for (;;) {
      wake_.wait(lock, [this] { return stop_ || due_; });
      if (stop_) return;
      due_ = false;
      lock.unlock();
      sqlite3_wal_checkpoint_v2(db_, "main", SQLITE_CHECKPOINT_PASSIVE, nullptr, nullptr);
      lock.lock();
    }
  }

  sqlite3* db_ = nullptr;
  std::mutex mutex_;
  std::condition_variable wake_;
  bool due_ = false;
  bool stop_ = false;
  std::thread thread_;
};

// Makes committed WAL frames durable off the writer's thread (StoreOptions::deferred_sync).
// Invariant: durable() == t means fdatasync on the WAL file returned success after the commit
// with ticket t had returned, so every commit up to t is on disk. The WAL file is opened here
// (read-only: fdatasync needs no write access on Linux); when it is first opened, or was
// replaced (another inode under the same name), the directory is synced too, so the file's name
// survives a power loss. A failed sync is final (PostgreSQL's "fsyncgate" lesson: the kernel may
// have dropped the dirty pages, so a retry proves nothing).
class WalSyncer {
 public:
  ~WalSyncer() {
    if (thread_.joinable()) {
      {
        std::lock_guard<std::mutex> lock(mutex_);
        stop_ = true;  // the loop syncs what was requested before it stops
      }
      wake_.notify_one();
      thread_.join();
    }
    if (wal_fd_ >= 0) ::close(wal_fd_);
    if (event_fd_ >= 0) ::close(event_fd_);
  }

  Status Start(const std::string& db_path) {
    wal_path_ = db_path + "-wal";
    const std::size_t slash = db_path.rfind('/');
    dir_path_ = slash == std::string::npos ? "." : (slash == 0 ? "/" : db_path.substr(0, slash));
    event_fd_ = ::eventfd(0, EFD_NONBLOCK | EFD_CLOEXEC);
    if (event_fd_ < 0) return Status::IoError(std::string("eventfd: ") + std::strerror(errno));
    thread_ = std::thread([this] {
      pthread_setname_np(pthread_self(), "rw-walsync");
      Loop();
    });
    return Status::Ok();
  }

  // Writer thread, after a successful COMMIT.
  std::uint64_t Committed() {
    std::uint64_t ticket = 0;
    {
      std::lock_guard<std::mutex> lock(mutex_);
      ticket = ++requested_;
    }
    wake_.notify_one();
    return ticket;
  }

  std::uint64_t durable() const { return durable_.load(std::memory_order_acquire); }
  Status status() const {
    std::lock_guard<std::mutex> lock(mutex_);
    return failed_;
  }
  Status Wait(std::uint64_t ticket) {
    std::unique_lock<std::mutex> lock(mutex_);
    done_.wait(lock, [&] { return !failed_.ok() || durable_.load() >= ticket; });
    return durable_.load() >= ticket ? Status::Ok() : failed_;
  }
  int event_fd() const { return event_fd_; }
  void ClearWake() {
    std::uint64_t n = 0;
    while (::read(event_fd_, &n, sizeof n) == static_cast<ssize_t>(sizeof n)) {
    }
  }

 private:
  void Loop() {
    std::unique_lock<std::mutex> lock(mutex_);
    for (;;) {
      wake_.wait(lock, [this] { return stop_ || requested_ > durable_.load(); });
      if (requested_ == durable_.load() || !failed_.ok()) {
        if (stop_) return;
        if (!failed_.ok()) {
          wake_.wait(lock, [this] { return stop_; });
          return;
        }
        continue;
      }
      const std::uint64_t target = requested_;
      lock.unlock();
      const Status st = SyncOnce();
      lock.lock();
      if (st.ok()) {
        durable_.store(target, std::memory_order_release);
      } else {
        failed_ = st;
      }
      done_.notify_all();
      const std::uint64_t one = 1;
      [[maybe_unused]] const ssize_t w = ::write(event_fd_, &one, sizeof one);
    }
  }

  Status SyncOnce() {
    struct stat named {};
    if (::stat(wal_path_.c_str(), &named) != 0) {
      return Status::IoError("store: WAL file " + wal_path_ + ": " + std::strerror(errno));
    }
    if (wal_fd_ >= 0 && (named.st_ino != wal_ino_ || named.st_dev != wal_dev_)) {
      ::close(wal_fd_);
      wal_fd_ = -1;
    }
    if (wal_fd_ < 0) {
      wal_fd_ = ::open(wal_path_.c_str(), O_RDONLY | O_CLOEXEC);
      if (wal_fd_ < 0) {
        return Status::IoError("store: open " + wal_path_ + ": " + std::strerror(errno));
      }
      struct stat opened {};
      if (::fstat(wal_fd_, &opened) != 0) {
        return Status::IoError("store: fstat " + wal_path_ + ": " + std::strerror(errno));
      }
      wal_ino_ = opened.st_ino;
      wal_dev_ = opened.st_dev;
      const int dir = ::open(dir_path_.c_str(), O_RDONLY | O_DIRECTORY | O_CLOEXEC);
      if (dir < 0 || ::fsync(dir) != 0) {
        const int e = errno;
        if (dir >= 0) ::close(dir);
        return Status::IoError("store: sync directory " + dir_path_ + ": " + std::strerror(e));
      }
      ::close(dir);
    }
    if (::fdatasync(wal_fd_) != 0) {
      return Status::IoError("store: fdatasync " + wal_path_ + ": " + std::strerror(errno));
    }
    return Status::Ok();
  }

  std::string wal_path_, dir_path_;
  int wal_fd_ = -1;
  ino_t wal_ino_ = 0;
  dev_t wal_dev_ = 0;
  int event_fd_ = -1;
  mutable std::mutex mutex_;
  std::condition_variable wake_;  // the loop: a request or stop
  std::condition_variable done_;  // waiters: durable_ advanced or failed_
  std::uint64_t requested_ = 0;   // the last committed ticket
  std::atomic<std::uint64_t> durable_{0};
  Status failed_;
  bool stop_ = false;
  std::thread thread_;
};

struct Store::Impl {
  StoreOptions options;
  sqlite3* db = nullptr;
  std::unique_ptr<Checkpointer> checkpointer;  // writable files with background_checkpoint
  std::unique_ptr<WalSyncer> syncer;           // writable files with deferred_sync
  std::uint64_t commits = 0;                   // tickets without a syncer
  int version = 0;
  bool in_transaction = false;
  std::array<sqlite3_stmt*, kSqlCount> sql{};
  // The latest period key of every series the store has seen: the truth PutObservation
  // classifies by (a caller's SeriesInfo copy may be stale). Changes inside the open transaction
  // are undone by Rollback: undo holds the state before the first change (nullopt: created).
  std::unordered_map<std::int64_t, SeriesState> series;
  std::unordered_map<std::int64_t, std::optional<SeriesState>> undo;

  ~Impl() {
    if (in_transaction && db != nullptr) sqlite3_exec(db, "ROLLBACK", nullptr, nullptr, nullptr);
    syncer.reset();  // syncs what was committed before it stops
    if (checkpointer) sqlite3_wal_hook(db, nullptr, nullptr);
    checkpointer.reset();  // its connection closes first; the writer's close checkpoints the rest
    for (sqlite3_stmt* s : sql) sqlite3_finalize(s);
    sqlite3_close(db);
  }

  Status Exec(const char* text, std::string_view what) {
    if (sqlite3_exec(db, text, nullptr, nullptr, nullptr) != SQLITE_OK) {
      return SqliteError(db, what);
    }
    return Status::Ok();
  }

  // One row, one integer column (or NULL -> *is_null).
  Status QueryInt(sqlite3_stmt* s, std::string_view what, std::int64_t* out, bool* is_null) {
    const int rc = sqlite3_step(s);
    if (rc != SQLITE_ROW) {
      if (rc == SQLITE_DONE) {
        *is_null = true;
        return Status::Ok();
      }
      return SqliteError(db, what);
    }
    *is_null = sqlite3_column_type(s, 0) == SQLITE_NULL;
    *out = sqlite3_column_int64(s, 0);
    return Status::Ok();
  }

  Status StepDone(sqlite3_stmt* s, std::string_view what) {
    if (sqlite3_step(s) != SQLITE_DONE) return SqliteError(db, what);
    return Status::Ok();
  }
  // The same for the per-row statements: the context text is built only on failure.
  template <typename What>
  requires std::is_invocable_r_v<std::string, What> Status StepDone(sqlite3_stmt* s, What&& what) {
    if (sqlite3_step(s) != SQLITE_DONE) return SqliteError(db, what());
    return Status::Ok();
  }

  Status RequireWrite(std::string_view what) const {
    if (options.read_only) {
      return Status::InvalidArgument("store: " + std::string(what) + ": " + options.path +
                                     " is open read-only");
    }
    if (!in_transaction) {
      return Status::InvalidArgument("store: " + std::string(what) +
                                     " outside a transaction (call Begin first)");
    }
    return Status::Ok();
  }

  void RememberBefore(std::int64_t id) {
    if (undo.count(id) != 0) return;
    auto it = series.find(id);
    undo.emplace(id, it == series.end() ? std::nullopt : std::optional<SeriesState>(it->second));
  }

  void UndoTransaction() {
    for (auto& [id, before] : undo) {
      if (before) {
        series[id] = std::move(*before);
      } else {
        series.erase(id);
      }
    }
    undo.clear();
  }

  Status ApplyPragmas();
  Status CreateOrMigrate();
  Status ReadVersion(bool* has_schema);
  Status Prepare();
  Status LoadSeriesState(std::int64_t id, SeriesState** out);
};

Status Store::Impl::ApplyPragmas() {
  if (sqlite3_busy_timeout(db, options.busy_timeout_ms) != SQLITE_OK) {
    return SqliteError(db, "busy_timeout");
  }
  if (options.read_only) return Status::Ok();
  // journal_mode answers with the mode in force; anything but "wal" (e.g. an in-memory file)
  // would silently lose the durability the daemon's acks promise.
  sqlite3_stmt* s = nullptr;
  if (sqlite3_prepare_v2(db, "PRAGMA journal_mode = WAL", -1, &s, nullptr) != SQLITE_OK) {
    return SqliteError(db, "journal_mode = WAL");
  }
  const int rc = sqlite3_step(s);
  const std::string mode = rc == SQLITE_ROW ? ColumnText(s, 0) : std::string();
  Status st = rc == SQLITE_ROW ? Status::Ok() : SqliteError(db, "journal_mode = WAL");
  sqlite3_finalize(s);
  if (!st.ok()) return st;
  if (mode != "wal") {
    return Status::IoError("store: " + options.path + ": journal mode is '" + mode +
                           "', WAL could not be enabled");
  }
  // deferred_sync: the WalSyncer adds the per-commit sync FULL would do inside COMMIT.
  const bool sqlite_full =
      options.synchronous_full && !(options.deferred_sync && !options.read_only);
  st = Exec(sqlite_full ? "PRAGMA synchronous = FULL" : "PRAGMA synchronous = NORMAL",
            "synchronous");
  if (!st.ok()) return st;
  return Exec("PRAGMA foreign_keys = ON", "foreign_keys");
}

// *has_schema: the file has a schema_version table; then `version` is set from its row.
Status Store::Impl::ReadVersion(bool* has_schema) {
  std::int64_t tables = 0;
  bool none = false;
  sqlite3_stmt* s = nullptr;
  auto query = [&](const char* text, std::int64_t* out) -> Status {
    if (sqlite3_prepare_v2(db, text, -1, &s, nullptr) != SQLITE_OK) {
      return SqliteError(db, "read the schema of " + options.path);
    }
    Status st = QueryInt(s, "read the schema of " + options.path, out, &none);
    sqlite3_finalize(s);
    return st;
  };
  std::int64_t has_table = 0;
  Status st =
      query("SELECT COUNT(*) FROM sqlite_schema WHERE type = 'table' AND name = 'schema_version'",
            &has_table);
  if (!st.ok()) return st;
  *has_schema = has_table != 0;
  if (!*has_schema) {
    st = query("SELECT COUNT(*) FROM sqlite_schema", &tables);
    if (!st.ok()) return st;
    if (tables != 0) {
      return Status::InvalidArgument("store: " + options.path +
                                     " is an SQLite database but not a rimwatch store (it has "
                                     "no schema_version table)");
    }
    return Status::Ok();
  }
  std::int64_t v = 0;
  st = query("SELECT version FROM schema_version WHERE singleton = 1", &v);
  if (!st.ok()) return st;
  if (none) {
    return Status::InvalidArgument("store: " + options.path +
                                   ": the schema_version table has no row");
  }
  if (v < 1 || v > std::numeric_limits<int>::max()) {
    return Status::InvalidArgument("store: " + options.path + " has schema version " +
                                   std::to_string(v) + ", which no rimwatch wrote");
  }
  version = static_cast<int>(v);
  return Status::Ok();
}

Status Store::Impl::CreateOrMigrate() {
  const int current = Store::CurrentSchemaVersion();
  bool has_schema = false;
  if (options.read_only) {
    Status st = ReadVersion(&has_schema);
    if (!st.ok()) return st;
    if (!has_schema) {
      return Status::InvalidArgument("store: " + options.path + " holds no rimwatch store");
    }
  } else {
    // Inside one write transaction, so two processes creating the same file cannot both do it.
    Status st = Exec("BEGIN IMMEDIATE", "begin the schema transaction");
    if (!st.ok()) return st;
    st = ReadVersion(&has_schema);
    if (st.ok() && !has_schema) {
      st = Exec(kStoreDdl, "create the schema");
      if (st.ok()) {
        st = Exec(("INSERT INTO schema_version (singleton, version) VALUES (1, " +
                   std::to_string(current) + ")")
                      .c_str(),
                  "write the schema version");
      }
      if (st.ok()) version = current;
    }
    for (int v = version; st.ok() && v >= 1 && v < current; ++v) {
      const Migration& m = kMigrations[static_cast<std::size_t>(v - 1)];
      st = Exec(m.sql, std::string("upgrade from schema version ") + std::to_string(v) + " (" +
                           m.what + ")");
      if (st.ok()) {
        st = Exec(("UPDATE schema_version SET version = " + std::to_string(v + 1)).c_str(),
                  "write the schema version");
      }
      if (st.ok()) version = v + 1;
    }
    if (st.ok() && version <= current) {
      st = Exec("COMMIT", "commit the schema transaction");
    }
    if (!st.ok() || version > current) {
      sqlite3_exec(db, "ROLLBACK", nullptr, nullptr, nullptr);
      if (!st.ok()) return st;
    }
  }
  if (version > current) {
    return Status::InvalidArgument("store: " + options.path + " has schema version " +
                                   std::to_string(version) + ", newer than this build knows (" +
                                   std::to_string(current) + "); use a newer rimwatch");
  }
  if (version < current) {  // read-only
    return Status::InvalidArgument("store: " + options.path + " has schema version " +
                                   std::to_string(version) + " and needs an upgrade to " +
                                   std::to_string(current) + "; open it once read-write");
  }
  return Status::Ok();
}

Status Store::Impl::Prepare() {
  for (int i = 0; i < kSqlCount; ++i) {
    if (sqlite3_prepare_v3(db, kSqlText[i], -1, SQLITE_PREPARE_PERSISTENT, &sql[i], nullptr) !=
        SQLITE_OK) {
      return SqliteError(db, std::string("prepare \"") + kSqlText[i] + "\"");
    }
  }
  return Status::Ok();
}

// The cached state of a series, loading it from the file the first time.
Status Store::Impl::LoadSeriesState(std::int64_t id, SeriesState** out) {
  auto it = series.find(id);
  if (it != series.end()) {
    *out = &it->second;
    return Status::Ok();
  }
  SeriesState state;
  {
    StatementUse q(sql[kSeriesById]);
    sqlite3_bind_int64(q.get(), 1, id);
    const int rc = sqlite3_step(q.get());
    if (rc == SQLITE_DONE) {
      return Status::InvalidArgument("store: unknown series id " + std::to_string(id));
    }
    if (rc != SQLITE_ROW) return SqliteError(db, "look up series " + std::to_string(id));
    state.name = ColumnText(q.get(), 0);
    if (!PeriodKindFromName(ColumnText(q.get(), 1), &state.kind)) {
      return Status::IoError("store: series " + state.name + " has an unknown period kind");
    }
  }
  StatementUse q(sql[kSeriesLatest]);
  sqlite3_bind_int64(q.get(), 1, id);
  std::int64_t latest = 0;
  bool none = false;
  Status st = QueryInt(q.get(), "latest period of series " + state.name, &latest, &none);
  if (!st.ok()) return st;
  if (!none) state.latest_key = latest;
  *out = &series.emplace(id, std::move(state)).first->second;
  return Status::Ok();
}

Store::Store(std::unique_ptr<Impl> impl) : impl_(std::move(impl)) {}
Store::~Store() = default;

int Store::CurrentSchemaVersion() { return 1 + static_cast<int>(kMigrations.size()); }
int Store::schema_version() const { return impl_->version; }
const std::string& Store::path() const { return impl_->options.path; }
bool Store::in_transaction() const { return impl_->in_transaction; }

Status Store::Open(const StoreOptions& options, std::unique_ptr<Store>* out) {
  if (options.path.empty()) return Status::InvalidArgument("store: the file path is empty");
  if (options.busy_timeout_ms < 0) {
    return Status::InvalidArgument(
        "store: busy_timeout_ms = " + std::to_string(options.busy_timeout_ms) + ": must be >= 0");
  }
  auto impl = std::make_unique<Impl>();
  impl->options = options;
  const int flags =
      (options.read_only ? SQLITE_OPEN_READONLY : SQLITE_OPEN_READWRITE | SQLITE_OPEN_CREATE) |
      SQLITE_OPEN_NOMUTEX;
  if (sqlite3_open_v2(options.path.c_str(), &impl->db, flags, nullptr) != SQLITE_OK) {
    return SqliteError(impl->db, "open " + options.path);
  }
  sqlite3_extended_result_codes(impl->db, 1);
  Status st = impl->ApplyPragmas();
  if (st.ok()) st = impl->CreateOrMigrate();
  if (st.ok()) st = impl->Prepare();
  if (!st.ok()) return st;
  if (!options.read_only && options.background_checkpoint) {
    auto c = std::make_unique<Checkpointer>();
    if (c->Start(options.path, options.busy_timeout_ms)) {
      // Replaces SQLite's automatic checkpoint (itself a wal hook) on the writer.
      sqlite3_wal_hook(impl->db, &Checkpointer::Hook, c.get());
      impl->checkpointer = std::move(c);
    }
  }
  if (!options.read_only && options.synchronous_full && options.deferred_sync) {
    impl->syncer = std::make_unique<WalSyncer>();
    st = impl->syncer->Start(options.path);
    if (!st.ok()) return st;
  }
  out->reset(new Store(std::move(impl)));
  return Status::Ok();
}

Status Store::CommitDeferred(std::uint64_t* ticket) {
  if (!impl_->syncer) {
    Status st = Commit();
    if (st.ok()) *ticket = ++impl_->commits;
    return st;
  }
  Status st = CommitStep();
  if (st.ok()) *ticket = impl_->syncer->Committed();
  return st;
}

std::uint64_t Store::durable_ticket() const {
  return impl_->syncer ? impl_->syncer->durable() : impl_->commits;
}

Status Store::WaitDurable(std::uint64_t ticket) {
  return impl_->syncer ? impl_->syncer->Wait(ticket) : Status::Ok();
}

Status Store::sync_status() const { return impl_->syncer ? impl_->syncer->status() : Status::Ok(); }

int Store::sync_wake_fd() const { return impl_->syncer ? impl_->syncer->event_fd() : -1; }

void Store::ClearSyncWake() {
  if (impl_->syncer) impl_->syncer->ClearWake();
}

Status Store::Begin() {
  if (impl_->options.read_only) {
    return Status::InvalidArgument("store: Begin: " + impl_->options.path + " is open read-only");
  }
  if (impl_->syncer) {
    Status failed = impl_->syncer->status();
    if (!failed.ok()) return failed;
  }
  if (impl_->in_transaction) {
    return Status::InvalidArgument("store: Begin: a transaction is already open");
  }
  StatementUse q(impl_->sql[kBegin]);
  Status st = impl_->StepDone(q.get(), "begin");
  if (!st.ok()) return st;
  impl_->in_transaction = true;
  impl_->undo.clear();
  return Status::Ok();
}

Status Store::Commit() {
  if (!impl_->syncer) return CommitStep();
  std::uint64_t ticket = 0;
  Status st = CommitDeferred(&ticket);
  if (!st.ok()) return st;
  return impl_->syncer->Wait(ticket);
}

Status Store::CommitStep() {
  if (!impl_->in_transaction) {
    return Status::InvalidArgument("store: Commit: no open transaction");
  }
  Status st;
  {
    StatementUse q(impl_->sql[kCommit]);
    st = impl_->StepDone(q.get(), "commit");
  }
  if (!st.ok()) {
    // Nothing of a failed transaction is kept: roll back what SQLite has not already.
    if (sqlite3_get_autocommit(impl_->db) == 0) {
      StatementUse r(impl_->sql[kRollback]);
      sqlite3_step(r.get());
    }
    impl_->UndoTransaction();
  }
  impl_->undo.clear();
  impl_->in_transaction = false;
  return st;
}

Status Store::Rollback() {
  if (!impl_->in_transaction) {
    return Status::InvalidArgument("store: Rollback: no open transaction");
  }
  Status st;
  if (sqlite3_get_autocommit(impl_->db) == 0) {
    StatementUse q(impl_->sql[kRollback]);
    st = impl_->StepDone(q.get(), "rollback");
  }
  impl_->UndoTransaction();
  impl_->in_transaction = false;
  return st;
}

Status Store::FindSeries(const std::string& name, std::optional<SeriesInfo>* out) {
  out->reset();
  std::int64_t id = 0;
  {
    StatementUse q(impl_->sql[kFindSeries]);
    BindText(q.get(), 1, name);
    const int rc = sqlite3_step(q.get());
    if (rc == SQLITE_DONE) return Status::Ok();
    if (rc != SQLITE_ROW) return SqliteError(impl_->db, "find series " + name);
    id = sqlite3_column_int64(q.get(), 0);
  }
  SeriesState* state = nullptr;
  Status st = impl_->LoadSeriesState(id, &state);
  if (!st.ok()) return st;
  *out = SeriesInfo{id, state->name, state->kind, state->latest_key};
  return Status::Ok();
}

Status Store::EnsureSeries(const std::string& name, PeriodKind kind, SeriesInfo* out) {
  std::optional<SeriesInfo> found;
  Status st = FindSeries(name, &found);
  if (!st.ok()) return st;
  if (found) {
    if (found->kind != kind) {
      return Status::InvalidArgument("series " + name + " holds " +
                                     std::string(PeriodKindName(found->kind)) + " periods, got " +
                                     std::string(PeriodKindName(kind)));
    }
    *out = *found;
    return Status::Ok();
  }
  st = impl_->RequireWrite("EnsureSeries");
  if (!st.ok()) return st;
  if (name.empty()) return Status::InvalidArgument("store: a series name must not be empty");
  {
    StatementUse q(impl_->sql[kInsertSeries]);
    BindText(q.get(), 1, name);
    BindText(q.get(), 2, PeriodKindName(kind));
    st = impl_->StepDone(q.get(), "add series " + name);
    if (!st.ok()) return st;
  }
  const std::int64_t id = sqlite3_last_insert_rowid(impl_->db);
  impl_->RememberBefore(id);
  impl_->series[id] = SeriesState{name, kind, std::nullopt};
  *out = SeriesInfo{id, name, kind, std::nullopt};
  return Status::Ok();
}

Status Store::PutObservation(SeriesInfo* series, const Period& period, double value,
                             const std::string& released_at, const std::string& received_at,
                             PutOutcome* outcome) {
  Status st = impl_->RequireWrite("PutObservation");
  if (!st.ok()) return st;
  if (series == nullptr || outcome == nullptr) {
    return Status::InvalidArgument("store: PutObservation: series and outcome must not be null");
  }
  SeriesState* state = nullptr;
  st = impl_->LoadSeriesState(series->id, &state);
  if (!st.ok()) return st;
  if (period.kind != state->kind) {
    return Status::InvalidArgument(KindMismatch(state->name, state->kind, period));
  }
  if (!std::isfinite(value)) {
    return Status::InvalidArgument("store: series " + state->name + " period " +
                                   FormatPeriod(period.kind, period.key) +
                                   ": the value must be finite");
  }
  int vintage = 1;
  PutOutcome result = PutOutcome::kNew;
  if (state->latest_key && period.key <= *state->latest_key) {
    StatementUse q(impl_->sql[kLatestVintage]);
    sqlite3_bind_int64(q.get(), 1, series->id);
    sqlite3_bind_int64(q.get(), 2, period.key);
    const int rc = sqlite3_step(q.get());
    if (rc == SQLITE_ROW) {
      vintage = sqlite3_column_int(q.get(), 0) + 1;
      result = SameBits(sqlite3_column_double(q.get(), 1), value) ? PutOutcome::kDuplicate
                                                                  : PutOutcome::kRevision;
    } else if (rc == SQLITE_DONE) {
      result = PutOutcome::kLate;
    } else {
      return SqliteError(impl_->db, "look up series " + state->name + " period " +
                                        FormatPeriod(period.kind, period.key));
    }
  }
  if (result != PutOutcome::kDuplicate) {
    const std::string text = FormatPeriod(period.kind, period.key);
    StatementUse q(impl_->sql[kInsertObservation]);
    sqlite3_stmt* s = q.get();
    sqlite3_bind_int64(s, 1, series->id);
    sqlite3_bind_int64(s, 2, period.key);
    BindText(s, 3, text);
    sqlite3_bind_int(s, 4, vintage);
    sqlite3_bind_double(s, 5, value);
    BindOptionalText(s, 6, released_at);
    BindText(s, 7, received_at);
    st = impl_->StepDone(s, [&] { return "store series " + state->name + " period " + text; });
    if (!st.ok()) return st;
    if (result == PutOutcome::kNew) {
      impl_->RememberBefore(series->id);
      state->latest_key = period.key;
    }
  }
  series->name = state->name;
  series->kind = state->kind;
  series->latest_key = state->latest_key;
  *outcome = result;
  return Status::Ok();
}

Status Store::LoadSeries(std::int64_t series_id, std::vector<StoredValue>* out) {
  out->clear();
  StatementUse q(impl_->sql[kLoadSeries]);
  sqlite3_bind_int64(q.get(), 1, series_id);
  int rc = 0;
  while ((rc = sqlite3_step(q.get())) == SQLITE_ROW) {
    const std::int64_t key = sqlite3_column_int64(q.get(), 0);
    if (out->empty() || out->back().period_key != key) out->emplace_back();
    StoredValue& v = out->back();  // rows come by vintage: the last one of a key wins
    v.period_key = key;
    v.period_text = ColumnText(q.get(), 1);
    v.vintage = sqlite3_column_int(q.get(), 2);
    v.value = sqlite3_column_double(q.get(), 3);
  }
  if (rc != SQLITE_DONE) {
    out->clear();
    return SqliteError(impl_->db, "load series " + std::to_string(series_id));
  }
  return Status::Ok();
}

Status Store::CountObservations(std::int64_t* out) {
  StatementUse q(impl_->sql[kCountObservations]);
  bool none = false;
  return impl_->QueryInt(q.get(), "count observations", out, &none);
}

Status Store::AddModel(const std::string& name, const std::string& spec_text, const std::string& at,
                       std::int64_t* model_id) {
  Status st = impl_->RequireWrite("AddModel");
  if (!st.ok()) return st;
  if (name.empty()) return Status::InvalidArgument("store: a model name must not be empty");
  {
    StatementUse q(impl_->sql[kFindActiveModel]);
    BindText(q.get(), 1, name);
    std::int64_t id = 0;
    bool none = false;
    st = impl_->QueryInt(q.get(), "find model " + name, &id, &none);
    if (!st.ok()) return st;
    if (!none) {
      return Status::InvalidArgument("store: model " + name + " is already active (id " +
                                     std::to_string(id) + "); drop it first");
    }
  }
  StatementUse q(impl_->sql[kInsertModel]);
  BindText(q.get(), 1, name);
  BindText(q.get(), 2, spec_text);
  BindText(q.get(), 3, at);
  st = impl_->StepDone(q.get(), "add model " + name);
  if (!st.ok()) return st;
  *model_id = sqlite3_last_insert_rowid(impl_->db);
  return Status::Ok();
}

Status Store::DropModel(const std::string& name, const std::string& at) {
  Status st = impl_->RequireWrite("DropModel");
  if (!st.ok()) return st;
  StatementUse q(impl_->sql[kDropModel]);
  BindText(q.get(), 1, name);
  BindText(q.get(), 2, at);
  st = impl_->StepDone(q.get(), "drop model " + name);
  if (!st.ok()) return st;
  if (sqlite3_changes(impl_->db) == 0) {
    return Status::InvalidArgument("store: no active model named " + name);
  }
  return Status::Ok();
}

Status Store::ActiveModels(std::vector<StoredModel>* out) {
  out->clear();
  StatementUse q(impl_->sql[kActiveModels]);
  int rc = 0;
  while ((rc = sqlite3_step(q.get())) == SQLITE_ROW) {
    StoredModel m{sqlite3_column_int64(q.get(), 0), ColumnText(q.get(), 1), ColumnText(q.get(), 2),
                  ColumnText(q.get(), 3), std::nullopt};
    if (sqlite3_column_type(q.get(), 4) != SQLITE_NULL) {
      m.recorded_inputs = sqlite3_column_int64(q.get(), 4);
    }
    out->push_back(std::move(m));
  }
  if (rc != SQLITE_DONE) {
    out->clear();
    return SqliteError(impl_->db, "list models");
  }
  return Status::Ok();
}

Status Store::SetRecordedInputs(std::int64_t model_id, std::int64_t inputs) {
  Status st = impl_->RequireWrite("SetRecordedInputs");
  if (!st.ok()) return st;
  if (inputs < 0) {
    return Status::InvalidArgument("store: SetRecordedInputs: inputs = " + std::to_string(inputs) +
                                   ": must be >= 0");
  }
  StatementUse q(impl_->sql[kSetRecordedInputs]);
  sqlite3_bind_int64(q.get(), 1, model_id);
  sqlite3_bind_int64(q.get(), 2, inputs);
  st = impl_->StepDone(
      q.get(), [&] { return "record the input cursor of model " + std::to_string(model_id); });
  if (!st.ok()) return st;
  if (sqlite3_changes(impl_->db) != 1) {
    return Status::InvalidArgument("store: SetRecordedInputs: no model with id " +
                                   std::to_string(model_id));
  }
  return Status::Ok();
}

Status Store::PutTest(const TestRecord& record) {
  Status st = impl_->RequireWrite("PutTest");
  if (!st.ok()) return st;
  StatementUse q(impl_->sql[kInsertTest]);
  sqlite3_stmt* s = q.get();
  sqlite3_bind_int64(s, 1, record.model_id);
  sqlite3_bind_int64(s, 2, record.row);
  BindText(s, 3, record.period);
  BindOptionalDouble(s, 4, record.rho);
  BindOptionalDouble(s, 5, record.rho_se);
  BindText(s, 6, record.payload_json);
  return impl_->StepDone(s, [&] {
    return "record tests of model " + std::to_string(record.model_id) + " row " +
           std::to_string(record.row);
  });
}

Status Store::PutSnapshot(const SnapshotRecord& record) {
  Status st = impl_->RequireWrite("PutSnapshot");
  if (!st.ok()) return st;
  StatementUse q(impl_->sql[kInsertSnapshot]);
  sqlite3_stmt* s = q.get();
  sqlite3_bind_int64(s, 1, record.model_id);
  sqlite3_bind_int64(s, 2, record.row);
  BindText(s, 3, record.period);
  BindText(s, 4, record.payload_json);
  return impl_->StepDone(s, [&] {
    return "record snapshot of model " + std::to_string(record.model_id) + " row " +
           std::to_string(record.row);
  });
}

Status Store::PutAlert(std::int64_t model_id, const AlertEvent& event,
                       const std::string& recorded_at) {
  Status st = impl_->RequireWrite("PutAlert");
  if (!st.ok()) return st;
  StatementUse q(impl_->sql[kInsertAlert]);
  sqlite3_stmt* s = q.get();
  sqlite3_bind_int64(s, 1, model_id);
  sqlite3_bind_int64(s, 2, event.row);
  BindText(s, 3, event.period);
  BindText(s, 4, event.monitor);
  BindText(s, 5, event.raised ? "raised" : "cleared");
  BindText(s, 6, AlertLevelName(event.level));
  sqlite3_bind_double(s, 7, event.statistic);  // NaN is stored as NULL
  sqlite3_bind_double(s, 8, event.threshold);
  BindText(s, 9, event.message);
  BindText(s, 10, recorded_at);
  return impl_->StepDone(s, "record alert " + event.monitor + " of model " +
                                std::to_string(model_id) + " row " + std::to_string(event.row));
}

Status Store::DeleteRecordsAfter(std::int64_t model_id, std::int64_t after_row) {
  Status st = impl_->RequireWrite("DeleteRecordsAfter");
  for (int which : {kDeleteTestsAfter, kDeleteSnapshotsAfter}) {
    if (!st.ok()) return st;
    StatementUse q(impl_->sql[which]);
    sqlite3_bind_int64(q.get(), 1, model_id);
    sqlite3_bind_int64(q.get(), 2, after_row);
    st = impl_->StepDone(q.get(), "delete records of model " + std::to_string(model_id) +
                                      " after row " + std::to_string(after_row));
  }
  return st;
}

Status Store::LoadAlerts(std::int64_t model_id, std::vector<AlertEvent>* out) {
  out->clear();
  StatementUse q(impl_->sql[kLoadAlerts]);
  sqlite3_stmt* s = q.get();
  sqlite3_bind_int64(s, 1, model_id);
  int rc = 0;
  while ((rc = sqlite3_step(s)) == SQLITE_ROW) {
    AlertEvent ev;
    ev.row = sqlite3_column_int64(s, 0);
    ev.period = ColumnText(s, 1);
    ev.model = ColumnText(s, 2);
    ev.monitor = ColumnText(s, 3);
    ev.raised = ColumnText(s, 4) == "raised";
    const std::string level = ColumnText(s, 5);
    ev.level = level == "critical" ? AlertLevel::kCritical
               : level == "warn"   ? AlertLevel::kWarn
                                   : AlertLevel::kNone;
    ev.statistic = ColumnDoubleOrNan(s, 6);
    ev.threshold = ColumnDoubleOrNan(s, 7);
    ev.message = ColumnText(s, 8);
    out->push_back(std::move(ev));
  }
  if (rc != SQLITE_DONE) {
    out->clear();
    return SqliteError(impl_->db, "load alerts of model " + std::to_string(model_id));
  }
  return Status::Ok();
}

Status Store::PruneRecords(std::int64_t keep_rows) {
  Status st = impl_->RequireWrite("PruneRecords");
  if (!st.ok()) return st;
  if (keep_rows < 0) {
    return Status::InvalidArgument("store: PruneRecords: keep_rows = " + std::to_string(keep_rows) +
                                   ": must be >= 0");
  }
  std::vector<std::int64_t> models;
  {
    StatementUse q(impl_->sql[kModelIds]);
    int rc = 0;
    while ((rc = sqlite3_step(q.get())) == SQLITE_ROW) {
      models.push_back(sqlite3_column_int64(q.get(), 0));
    }
    if (rc != SQLITE_DONE) return SqliteError(impl_->db, "list models to prune");
  }
  for (std::int64_t id : models) {
    // The model's last recorded row: the larger of its last tests and last snapshot row.
    std::int64_t last = std::numeric_limits<std::int64_t>::min();
    for (int which : {kMaxTestRow, kMaxSnapshotRow}) {
      StatementUse q(impl_->sql[which]);
      sqlite3_bind_int64(q.get(), 1, id);
      std::int64_t row = 0;
      bool none = false;
      st = impl_->QueryInt(q.get(), "last row of model " + std::to_string(id), &row, &none);
      if (!st.ok()) return st;
      if (!none) last = std::max(last, row);
    }
    if (last == std::numeric_limits<std::int64_t>::min()) continue;
    for (int which : {kPruneTests, kPruneSnapshots}) {
      StatementUse q(impl_->sql[which]);
      sqlite3_bind_int64(q.get(), 1, id);
      sqlite3_bind_int64(q.get(), 2, last - keep_rows);
      st = impl_->StepDone(q.get(), "prune records of model " + std::to_string(id));
      if (!st.ok()) return st;
    }
  }
  return Status::Ok();
}

std::int64_t Store::FileBytes() const {
  std::int64_t total = 0;
  for (const std::string& p : {impl_->options.path, impl_->options.path + "-wal"}) {
    struct stat info;
    if (stat(p.c_str(), &info) == 0) total += static_cast<std::int64_t>(info.st_size);
  }
  return total;
}

Status Store::IntegrityCheck(std::string* result) {
  result->clear();
  StatementUse q(impl_->sql[kIntegrityCheck]);
  int rc = 0;
  while ((rc = sqlite3_step(q.get())) == SQLITE_ROW) {
    if (!result->empty()) *result += "\n";
    *result += ColumnText(q.get(), 0);
  }
  if (rc != SQLITE_DONE) return SqliteError(impl_->db, "integrity_check");
  return Status::Ok();
}

}  // namespace rimwatch::daemon
