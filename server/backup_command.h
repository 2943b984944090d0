// `ogived backup --db PATH --to FILE`: a consistent copy of a database, safe while ogived runs on it
// (storage/backup.h). Exit status 0 on success, 1 when the backup failed, 2 for a usage error.
#ifndef OGIVE_SERVER_BACKUP_COMMAND_H_
#define OGIVE_SERVER_BACKUP_COMMAND_H_

namespace ogive {

// `args` are the words after "backup".
int RunBackupCommand(int argc, char** argv);

}  // namespace ogive

#endif  // OGIVE_SERVER_BACKUP_COMMAND_H_
