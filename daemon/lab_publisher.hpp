// Publishing the bench's store to the lab database (PostgreSQL, lab/pg.hpp).
//
// The SQLite store stays the durable journal. Migration 0003 adds an outbox:
// triggers record (table, row id) of every committed insert or update of a
// lot, part, job, run, reading or fit, in the writer's own transaction, while
// publishing is enabled. The publisher thread reads the outbox through its
// own SQLite connection, in seq order and in batches; fetches those rows as
// they are now; upserts them into the lab in one PostgreSQL transaction
// (INSERT ... ON CONFLICT (bench, id) DO UPDATE); and deletes the entries only
// after that COMMIT. A crash between the two sends the batch again, which the
// upserts absorb: at-least-once delivery, no duplicates. While the lab is
// down the bench measures on and the outbox grows; the thread reconnects with
// a back-off and drains it. The store itself (store.cpp) knows nothing of this.
#pragma once

#include "daemon/config.hpp"
#include "daemon/log.hpp"

#include <nlohmann/json.hpp>

#include <condition_variable>
#include <filesystem>
#include <functional>
#include <memory>
#include <mutex>
#include <string>
#include <string_view>
#include <thread>

struct sqlite3;

namespace junco::daemon {

class LabPublisher {
 public:
  using Log = daemon::Log;
  // With lab.database empty: turns the outbox off (and empties it) and does
  // nothing else. Otherwise turns it on; the first time, the store's existing
  // rows are queued too, so a bench joining a lab publishes its history.
  // Throws StoreError when the SQLite file cannot be opened.
  LabPublisher(const std::filesystem::path& sqlite_file, const LabConfig& lab, Log log);
  ~LabPublisher();
  LabPublisher(const LabPublisher&) = delete;
  LabPublisher& operator=(const LabPublisher&) = delete;

  void start();  // the publisher thread (no-op when disabled)
  void stop();   // finishes the batch in flight, then returns

  // For daemon.status: {enabled, bench, database (no password), connected,
  // backlog_rows, lag_s, published_rows, batches, last_error, ...}.
  nlohmann::json status();

 private:
  void run();
  bool publish_batch();  // false: outbox empty
  void connect();
  bool wait_for(double seconds);  // false when stopping

  struct Sqlite;
  struct Pg;
  LabConfig lab_;
  std::string store_id_;  // lab_publishing.store_id: which store publishes as lab_.bench
  Log log_;
  std::unique_ptr<Sqlite> sqlite_;   // the publisher thread's read-write connection
  std::unique_ptr<Sqlite> status_;   // status() queries, under status_mutex_
  std::unique_ptr<Pg> pg_;           // only the publisher thread touches it
  std::thread thread_;
  std::mutex mutex_;                 // guards the fields below
  std::mutex status_mutex_;
  std::condition_variable wake_;
  bool stopping_ = false;
  bool connected_ = false;
  long long published_rows_ = 0;
  long long batches_ = 0;
  int lab_schema_version_ = 0;
  std::string last_error_;
  double last_publish_unix_s_ = 0;
};

}  // namespace junco::daemon
