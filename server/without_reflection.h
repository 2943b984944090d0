// WithoutReflection: a server builder option that keeps gRPC server reflection off a server.
// Linking grpc++_reflection registers its plugin with every ServerBuilder from a static initializer,
// so reflection would be on whether asked for or not; ogived serves it only with --reflection, and
// never on its admin socket.
#ifndef OGIVE_SERVER_WITHOUT_REFLECTION_H_
#define OGIVE_SERVER_WITHOUT_REFLECTION_H_

#include <algorithm>
#include <memory>
#include <vector>

#include "grpcpp/grpcpp.h"
#include "grpcpp/impl/server_builder_option.h"
#include "grpcpp/impl/server_builder_plugin.h"

namespace ogive {

class WithoutReflection final : public grpc::ServerBuilderOption {
 public:
  void UpdateArguments(grpc::ChannelArguments*) override {}
  void UpdatePlugins(std::vector<std::unique_ptr<grpc::ServerBuilderPlugin>>* plugins) override {
    plugins->erase(std::remove_if(plugins->begin(), plugins->end(),
                                  [](const std::unique_ptr<grpc::ServerBuilderPlugin>& plugin) {
                                    return plugin->name() == "proto_server_reflection";
                                  }),
                   plugins->end());
  }
};

}  // namespace ogive

#endif  // OGIVE_SERVER_WITHOUT_REFLECTION_H_
