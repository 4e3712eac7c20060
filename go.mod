module github.com/tripass/tripass

go 1.26.8
