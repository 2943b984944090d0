// `ogived token`: administration of access tokens on a database file.
//
//   ogived token create --db PATH --role ROLE --label LABEL [--campaign NAME]...
//   ogived token list   --db PATH
//   ogived token revoke --db PATH LABEL
//
// When no server holds the database, the command opens it itself (taking the single-writer lock for
// the moment it runs, and migrating the schema if needed). When a running ogived holds it, the
// command sends the request to that server's admin socket (admin_socket.h): the server makes the
// write with its own writer connection (SQLite must not have two connections writing one file) and
// puts it in force at once. `create` prints the token, and only the token, on standard output: it is
// shown this once and stored nowhere.
#ifndef OGIVE_SERVER_TOKEN_COMMAND_H_
#define OGIVE_SERVER_TOKEN_COMMAND_H_

namespace ogive {

// Runs `ogived token ...`; argv[0] is "token". Returns the exit status: 0 done, 1 failed, 2 a usage
// error.
int RunTokenCommand(int argc, char** argv);

}  // namespace ogive

#endif  // OGIVE_SERVER_TOKEN_COMMAND_H_
